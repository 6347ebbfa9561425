// What the crew's screens keep on the device so that they open with no signal: who is signed in,
// the destinations and their policies, the crew's own open cases as last seen, and the half-typed
// form (src/stores/pre-alert.ts). IndexedDB, like the outbox, and wiped with it at sign-out
// (wipeDevice). The service worker keeps only code, styles, fonts and icons, never an API answer.
import { openDB, type DBSchema, type IDBPDatabase } from 'idb';
import { wipeOutbox } from './outbox-db';

export interface Kept<T> {
  value: T;
  /** When the server last gave this answer. */
  savedAt: number;
}

interface DeviceSchema extends DBSchema {
  kept: { key: string; value: Kept<unknown> };
}

let opening: Promise<IDBPDatabase<DeviceSchema>> | null = null;

function database(): Promise<IDBPDatabase<DeviceSchema>> {
  opening ??= openDB<DeviceSchema>('plumbline-device', 1, {
    upgrade(db) {
      db.createObjectStore('kept');
    },
  });
  return opening;
}

/** Keeps a plain copy of the server's answer; a device that cannot store simply keeps nothing. */
export async function keep<T>(key: string, value: T): Promise<void> {
  try {
    const plain = JSON.parse(JSON.stringify(value)) as T;
    await (await database()).put('kept', { value: plain, savedAt: Date.now() }, key);
  } catch {
    // Private browsing or a full disk: the screens still work online.
  }
}

export async function kept<T>(key: string): Promise<Kept<T> | null> {
  try {
    return ((await (await database()).get('kept', key)) as Kept<T> | undefined) ?? null;
  } catch {
    return null;
  }
}

/** Forgets one kept answer. */
export async function forget(key: string): Promise<void> {
  try {
    await (await database()).delete('kept', key);
  } catch {
    // Nothing was kept.
  }
}

/** Forgets everything this device kept for the person signing out, the outbox included. */
export async function wipeDevice(): Promise<void> {
  await Promise.allSettled([database().then((db) => db.clear('kept')), wipeOutbox()]);
  // Where older versions kept the half-typed form of a tab. The destination and unit remembered
  // for each person (localStorage) carry no patient data and stay.
  for (const key of Object.keys(sessionStorage)) if (key.startsWith('plumbline.')) sessionStorage.removeItem(key);
}
