// The outbox: every pre-alert is written to IndexedDB before the first attempt to send it, and
// leaves only when the server has acknowledged it. One outbox per tab, shared by every
// component; socket.io does the reconnecting, this only decides when to send.
//
// Several tabs: a Web Lock lets one tab send at a time and each entry is re-read before it is
// sent. If two tabs still sent the same pre-alert, the server's clientId idempotency answers the
// second with the case the first made, so a double send can never make a second case.
import { defineStore } from 'pinia';
import { ref, watch } from 'vue';
import type { PreAlert } from '@shared/schemas/cases';
import { submitPreAlert, type SubmitAnswer } from '@/api/cases';
import { connection, getSocket, SocketCommandError } from '@/api/socket';
import { entriesOf, getEntry, nextAttempt, putEntry, removeEntry, type OutboxEntry } from '@/offline/outbox-db';

export type { OutboxEntry };

export interface Delivery {
  clientId: string;
  caseId: number;
  caseNumber: string;
  hospital: string;
  title: string;
  at: number;
}

// A refusal that sending again cannot change: the entry waits for the paramedic instead.
const FINAL_CODES = new Set(['invalid', 'forbidden', 'conflict', 'not_found']);

/** 1 s, 2 s, 4 s … at most 30 s between tries while the server does not answer [ours]. */
export function backoffMs(failures: number): number {
  return Math.min(30_000, 1000 * 2 ** Math.max(0, failures - 1));
}

async function withSendLock(run: () => Promise<void>): Promise<void> {
  const locks = typeof navigator === 'undefined' ? undefined : navigator.locks;
  if (!locks) return run();
  await locks.request('plumbline-outbox-send', run);
}

export const useOutboxStore = defineStore('outbox', () => {
  const entries = ref<OutboxEntry[]>([]);
  const sendingId = ref<string | null>(null);
  const retryAt = ref<number | null>(null);
  const deliveries = ref<Delivery[]>([]);
  const storageError = ref<string | null>(null);
  /** The server's last "too many, wait" answer, shown to the crew until the next send gets through. */
  const heldBack = ref<string | null>(null);

  let userId: number | null = null;
  let failures = 0;
  let retryTimer: ReturnType<typeof setTimeout> | undefined;
  let draining = false;
  let drainAgain = false;
  const onDeliveredListeners = new Set<(answer: SubmitAnswer) => void>();
  const channel = typeof BroadcastChannel === 'undefined' ? null : new BroadcastChannel('plumbline-outbox');
  channel?.addEventListener('message', () => void refresh());

  async function refresh(): Promise<void> {
    if (userId === null) return;
    try {
      entries.value = await entriesOf(userId);
      storageError.value = null;
    } catch (err) {
      storageError.value = `This device could not read its outbox: ${(err as Error).message}`;
    }
  }

  /** Reads the outbox again, and tells this device's other tabs to. */
  async function changed(): Promise<void> {
    await refresh();
    channel?.postMessage('changed');
  }

  /** Forgets the wait between tries: the next one may go at once. */
  function resetBackoff(): void {
    failures = 0;
    clearTimeout(retryTimer);
    retryAt.value = null;
  }

  function scheduleRetry(ms: number): void {
    clearTimeout(retryTimer);
    retryAt.value = Date.now() + ms;
    retryTimer = setTimeout(() => {
      retryAt.value = null;
      void drain();
    }, ms);
  }

  async function sendPass(): Promise<void> {
    if (userId === null) return;
    for (const queued of await entriesOf(userId)) {
      if (!connection.connected.value) return;
      // Another tab may have sent it while this one waited for the lock.
      const held = await getEntry(queued.clientId);
      if (!held || held.rejected) continue;
      const entry = nextAttempt(held, Date.now());
      sendingId.value = entry.clientId;
      await putEntry(entry);
      try {
        const answer = await submitPreAlert(entry.payload);
        await removeEntry(entry.clientId);
        failures = 0;
        heldBack.value = null;
        deliveries.value = [{ clientId: entry.clientId, caseId: answer.caseId, caseNumber: answer.caseNumber, hospital: answer.summary.hospital.name, title: entry.title, at: Date.now() }, ...deliveries.value].slice(0, 20);
        for (const listener of onDeliveredListeners) listener(answer);
      } catch (err) {
        if (err instanceof SocketCommandError && FINAL_CODES.has(err.code)) {
          entry.rejected = { code: err.code, message: err.message, ...(err.field ? { field: err.field } : {}) };
          await putEntry(entry);
        } else if (err instanceof SocketCommandError && err.code === 'rate_limited') {
          // Held back, not refused: the pre-alert stays here and goes when the server will take it.
          failures += 1;
          heldBack.value = err.message;
          scheduleRetry(Math.max(err.retryAfterMs ?? 0, backoffMs(failures)));
          return;
        } else {
          failures += 1;
          scheduleRetry(backoffMs(failures));
          return;
        }
      } finally {
        sendingId.value = null;
        await changed();
      }
    }
  }

  /** Sends what is waiting, one at a time in the order made; a no-op without a connection. */
  async function drain(): Promise<void> {
    if (userId === null || !connection.connected.value) return;
    if (draining) {
      drainAgain = true;
      return;
    }
    draining = true;
    try {
      do {
        drainAgain = false;
        await withSendLock(sendPass);
      } while (drainAgain && connection.connected.value);
    } catch (err) {
      storageError.value = `This device could not use its outbox: ${(err as Error).message}`;
    } finally {
      draining = false;
    }
  }

  watch(connection.connected, (up) => {
    if (!up || userId === null) return;
    // A link that has just come back deserves a prompt first try.
    resetBackoff();
    void drain();
  });

  /** Starts the outbox for the signed-in paramedic: loads what a previous page left and sends it. */
  async function start(forUser: number): Promise<void> {
    if (userId !== forUser) {
      userId = forUser;
      deliveries.value = [];
    }
    getSocket();
    await refresh();
    void drain();
  }

  /** Keeps the pre-alert on this device first, then tries to send it. */
  async function enqueue(payload: PreAlert, title: string): Promise<OutboxEntry> {
    if (userId === null) throw new Error('The outbox has not started.');
    const entry: OutboxEntry = { clientId: payload.clientId, userId, payload, title, createdAt: Date.now(), attempts: 0, lastAttemptAt: null, rejected: null };
    await putEntry(entry);
    await changed();
    void drain();
    return entry;
  }

  /** "Send now": skip the wait, and give a refused entry one more go. */
  async function retryNow(clientId?: string): Promise<void> {
    if (clientId) {
      const entry = await getEntry(clientId);
      if (entry?.rejected) await putEntry({ ...entry, rejected: null });
      await refresh();
    }
    resetBackoff();
    await drain();
  }

  async function discard(clientId: string): Promise<void> {
    await removeEntry(clientId);
    await changed();
  }

  /** Called with each acknowledgement, so the case list shows the new case at once; returns the release. */
  function onDelivered(listener: (answer: SubmitAnswer) => void): () => void {
    onDeliveredListeners.add(listener);
    return () => onDeliveredListeners.delete(listener);
  }

  return { entries, sendingId, retryAt, deliveries, storageError, heldBack, start, enqueue, retryNow, discard, onDelivered };
});
