// The simulated boards' reloads, fetched and parsed on a thread of their own. Each real board is
// its own device and parses its own list; here twenty boards and two hundred ambulances share one
// process, and a list of hundreds of cases parsed on the main thread would hold up every other
// simulated device's receipts, which the benchmark times. The thread hands back only what the
// count needs.
import { Worker } from 'node:worker_threads';

export interface ReloadedCase { id: number; clientId: string; revision: number; hospital: { id: number } }
export interface Reload { status: number; cursor?: string; cases: ReloadedCase[] }

const THREAD = `
const { parentPort } = require('node:worker_threads');
parentPort.on('message', async ({ seq, url, cookie }) => {
  try {
    const res = await fetch(url, { headers: { accept: 'application/json', cookie } });
    if (!res.ok) {
      await res.arrayBuffer();
      return parentPort.postMessage({ seq, status: res.status, cases: [] });
    }
    const body = await res.json();
    const cases = body.cases.map((c) => ({ id: c.id, clientId: c.clientId, revision: c.revision, hospital: { id: c.hospital.id } }));
    parentPort.postMessage({ seq, status: res.status, cursor: body.cursor, cases });
  } catch (err) {
    parentPort.postMessage({ seq, error: String(err && err.message || err) });
  }
});
`;

export function boardReloads() {
  const worker = new Worker(THREAD, { eval: true });
  worker.unref();
  const waiting = new Map<number, { resolve(r: Reload): void; reject(e: Error): void }>();
  let seq = 0;
  worker.on('message', (m: Reload & { seq: number; error?: string }) => {
    const pending = waiting.get(m.seq);
    waiting.delete(m.seq);
    if (m.error !== undefined) pending?.reject(new Error(m.error));
    else pending?.resolve({ status: m.status, cursor: m.cursor, cases: m.cases });
  });
  // A thread that died answers nothing: whatever waits, and whatever asks later, is refused.
  let gone: Error | null = null;
  const fail = (err: Error) => {
    gone ??= err;
    for (const pending of waiting.values()) pending.reject(err);
    waiting.clear();
  };
  worker.on('error', fail);
  worker.on('exit', (code) => fail(new Error(`the reload thread exited (${code})`)));
  return {
    /** GET `url` with the board's cookie; rejects when the server cannot be reached. */
    load(url: string, cookie: string): Promise<Reload> {
      return new Promise((resolve, reject) => {
        if (gone) return reject(gone);
        waiting.set(++seq, { resolve, reject });
        worker.postMessage({ seq, url, cookie });
      });
    },
    close: () => worker.terminate(),
  };
}
