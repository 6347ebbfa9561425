// Pre-alerts that have not yet been acknowledged by the server, kept in IndexedDB so that a
// reload, a closed tab or a flat battery on the way never loses one.
import { openDB, type DBSchema, type IDBPDatabase } from 'idb';
import type { PreAlert } from '@shared/schemas/cases';

export interface OutboxRejection {
  code: string;
  message: string;
  field?: string;
}

export interface OutboxEntry {
  clientId: string;
  /** Only the person who made it sends it: another sign-in on a shared tablet must not. */
  userId: number;
  payload: PreAlert;
  /** What the list shows without re-deriving it: "Alderwick General · Medic 11 · 34 y, fell 4 m". */
  title: string;
  createdAt: number;
  attempts: number;
  lastAttemptAt: number | null;
  /** The server refused it as it stands; it stays here, shown, and is not sent again by itself. */
  rejected: OutboxRejection | null;
}

/** The entry as it is about to be sent once more: the same pre-alert, the same id, one try more. */
export const nextAttempt = (entry: OutboxEntry, at: number): OutboxEntry => ({ ...entry, attempts: entry.attempts + 1, lastAttemptAt: at });

/** Puts entries in the order the outbox sends and shows them: first made, first sent. */
export const inOrderMade = (entries: OutboxEntry[]): OutboxEntry[] => entries.sort((a, b) => a.createdAt - b.createdAt);

interface OutboxSchema extends DBSchema {
  outbox: { key: string; value: OutboxEntry; indexes: { 'by-user': number } };
}

let opening: Promise<IDBPDatabase<OutboxSchema>> | null = null;

function database(): Promise<IDBPDatabase<OutboxSchema>> {
  opening ??= openDB<OutboxSchema>('plumbline-outbox', 1, {
    upgrade(db) {
      const store = db.createObjectStore('outbox', { keyPath: 'clientId' });
      store.createIndex('by-user', 'userId');
    },
  });
  return opening;
}

export async function putEntry(entry: OutboxEntry): Promise<void> {
  // A deep plain copy: IndexedDB cannot clone Vue's reactive proxies.
  await (await database()).put('outbox', JSON.parse(JSON.stringify(entry)) as OutboxEntry);
}

export async function entriesOf(userId: number): Promise<OutboxEntry[]> {
  return inOrderMade(await (await database()).getAllFromIndex('outbox', 'by-user', userId));
}

export async function getEntry(clientId: string): Promise<OutboxEntry | undefined> {
  return (await database()).get('outbox', clientId);
}

export async function removeEntry(clientId: string): Promise<void> {
  await (await database()).delete('outbox', clientId);
}

/** What waits on this device, whoever made it. */
export async function allEntries(): Promise<OutboxEntry[]> {
  return inOrderMade(await (await database()).getAll('outbox'));
}

/** Empties the outbox of every person on this device (sign-out). */
export async function wipeOutbox(): Promise<void> {
  await (await database()).clear('outbox');
}
