// The simulated ED boards on a thread of their own. In life each board is its own screen; here
// twenty boards share a process with two hundred simulated ambulances, whose sockets take every
// broadcast of their agency and whose reconnects, acknowledgements and outboxes keep the main
// thread busy. A board's receipt that waited behind that work was timed as the product's delay:
// in a traced run the main thread stalled for more than 6 ms 815 times, and every slow sample's
// wait after the server had written it fell inside such a stall. On this thread a board sees a
// change when its bytes arrive. Receipts are stamped with the process's monotonic clock
// (`process.hrtime`), the same on every thread, and the main thread times them against its sends.
import { createRequire } from 'node:module';
import { Worker } from 'node:worker_threads';

const require = createRequire(import.meta.url);

/** Milliseconds on the monotonic clock every thread of this process shares. */
export const monotonicMs = () => Number(process.hrtime.bigint()) / 1e6;

export interface BoardScreen { url: string; cookie: string; hospitalId: number }

/** What one board saw of one pre-alert (by its client id): when first, how, and every id and revision since. */
export interface BoardSighting {
  clientId: string;
  /** When it first showed, on `monotonicMs`. */
  at: number;
  /** First shown by a live broadcast (not a reload). */
  live: boolean;
  /** When the board's connection then had last come up; Infinity while it was cut. */
  connectedAt: number;
  ids: number[];
  revision: number;
}

export interface BoardScreensReport {
  sightings: BoardSighting[][];
  freshReconnects: number;
  recoveredReconnects: number;
  snapshots: number;
  failedSnapshots: number;
  foreignDeliveries: number;
  drops: number;
  summaryChars: number;
  summaryCount: number;
}

// A board's reloads, fetched and parsed on one more thread: a list of hundreds of cases parsed on
// the boards' thread would hold up the other boards' receipts. It hands back only what the count needs.
const RELOAD_THREAD = `
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
    parentPort.postMessage({ seq, error: String((err && err.message) || err) });
  }
});
`;

const THREAD = `
const { parentPort, workerData, Worker } = require('node:worker_threads');
const { io } = require(workerData.socketIoClient);
const clock = () => Number(process.hrtime.bigint()) / 1e6;
const stats = { freshReconnects: 0, recoveredReconnects: 0, snapshots: 0, failedSnapshots: 0, foreignDeliveries: 0, drops: 0, summaryChars: 0, summaryCount: 0 };

const reloader = new Worker(workerData.reloadThread, { eval: true });
const waiting = new Map();
let seq = 0;
reloader.on('message', (m) => {
  const pending = waiting.get(m.seq);
  waiting.delete(m.seq);
  if (pending) m.error !== undefined ? pending.reject(new Error(m.error)) : pending.resolve(m);
});
// A reload thread that died answers nothing: what waits is refused, and the boards try again.
let reloaderGone = null;
const reloaderFailed = (err) => {
  reloaderGone = reloaderGone || err;
  for (const pending of waiting.values()) pending.reject(reloaderGone);
  waiting.clear();
};
reloader.on('error', reloaderFailed);
reloader.on('exit', (code) => reloaderFailed(new Error('the reload thread exited (' + code + ')')));
const reload = (url, cookie) => new Promise((resolve, reject) => {
  if (reloaderGone) return reject(reloaderGone);
  waiting.set(++seq, { resolve, reject });
  reloader.postMessage({ seq, url, cookie });
});

const boards = workerData.boards.map((spec) => ({ ...spec, socket: null, connectedAt: 0, first: true, cursor: undefined, seen: new Map(), loaded: null }));

function observe(board, summary, live, at) {
  if (summary.hospital.id !== board.hospitalId) {
    stats.foreignDeliveries++;
    return;
  }
  let entry = board.seen.get(summary.clientId);
  if (!entry) {
    entry = { clientId: summary.clientId, at, live, connectedAt: board.connectedAt, ids: new Set(), revision: 0 };
    board.seen.set(summary.clientId, entry);
  }
  entry.ids.add(summary.id);
  entry.revision = Math.max(entry.revision, summary.revision);
}

// What the product's board reads (src/stores/board.ts): the changes since its last snapshot after
// a fresh connection, the whole list at the start and at the end.
async function snapshot(board, final) {
  for (let attempt = 0; attempt < 40; attempt++) {
    try {
      const since = !final && board.cursor ? '&changesSince=' + encodeURIComponent(board.cursor) : '';
      const res = await reload(board.url + '/api/board?hospitalId=' + board.hospitalId + since, board.cookie);
      if (res.status === 200) {
        stats.snapshots++;
        board.cursor = res.cursor;
        const at = clock();
        for (const summary of res.cases) observe(board, summary, false, at);
        return;
      }
    } catch {
      // The server is away; the board tries again as the real one would.
    }
    await new Promise((r) => setTimeout(r, 500));
  }
  stats.failedSnapshots++;
}

function open(board) {
  // The product's own client settings (src/api/socket.ts): socket.io reconnects by itself.
  const socket = io(board.url, { transports: ['websocket'], forceNew: true, reconnectionDelayMax: 5000, extraHeaders: { cookie: board.cookie } });
  board.socket = socket;
  socket.on('connect', () => {
    board.connectedAt = clock();
    if (!board.first) socket.recovered ? stats.recoveredReconnects++ : stats.freshReconnects++;
    board.first = false;
    // The real board reloads the truth after every connection that did not recover its state.
    if (!socket.recovered) {
      const loading = snapshot(board, false);
      board.loaded ??= loading;
    }
  });
  socket.on('case:submitted', (summary) => {
    const at = clock();
    stats.summaryChars += JSON.stringify(summary).length;
    stats.summaryCount++;
    observe(board, summary, true, at);
  });
  socket.on('case:updated', (summary) => observe(board, summary, true, clock()));
  socket.on('disconnect', (reason) => {
    // Until the next 'connect' the board is across a cut: socket.io hands a recovered socket the
    // packets it missed before it fires 'connect', and those are not timed.
    board.connectedAt = Infinity;
    if (reason === 'io server disconnect') socket.connect();
  });
  return new Promise((resolve, reject) => {
    const timer = setTimeout(() => reject(new Error('a board had no connection within 20 s')), 20000);
    socket.once('connect', () => {
      clearTimeout(timer);
      resolve();
    });
  });
}

parentPort.on('message', async (m) => {
  try {
    if (m.type === 'start') {
      await Promise.all(boards.map(open));
      // The run starts with every board up: showing the cases it had, as at the start of a shift.
      await Promise.all(boards.map((b) => b.loaded));
    } else if (m.type === 'drop') {
      const socket = boards[m.board].socket;
      if (socket.connected) {
        socket.io.engine.close();
        stats.drops++;
      }
    } else if (m.type === 'final') {
      for (let i = 0; i < boards.length; i += 5) await Promise.all(boards.slice(i, i + 5).map((b) => snapshot(b, true)));
    } else if (m.type === 'report') {
      const sightings = boards.map((b) => [...b.seen.values()].map((e) => ({ ...e, ids: [...e.ids] })));
      parentPort.postMessage({ seq: m.seq, report: { ...stats, sightings } });
      return;
    } else if (m.type === 'close') {
      for (const b of boards) b.socket?.close();
      await reloader.terminate();
    }
    parentPort.postMessage({ seq: m.seq });
  } catch (err) {
    parentPort.postMessage({ seq: m.seq, error: String((err && err.message) || err) });
  }
});
`;

/** Opens the boards on their own thread once `start` is called; every call answers when the thread has done it. */
export function boardScreens(screens: BoardScreen[]) {
  const worker = new Worker(THREAD, { eval: true, workerData: { boards: screens, socketIoClient: require.resolve('socket.io-client'), reloadThread: RELOAD_THREAD } });
  const waiting = new Map<number, { resolve(value: unknown): void; reject(err: Error): void }>();
  let seq = 0;
  let gone: Error | null = null;
  worker.on('message', (m: { seq: number; error?: string; report?: BoardScreensReport }) => {
    const pending = waiting.get(m.seq);
    waiting.delete(m.seq);
    if (m.error !== undefined) pending?.reject(new Error(m.error));
    else pending?.resolve(m.report);
  });
  const fail = (err: Error) => {
    gone ??= err;
    for (const pending of waiting.values()) pending.reject(err);
    waiting.clear();
  };
  worker.on('error', fail);
  worker.on('exit', (code) => fail(new Error(`the boards' thread exited (${code})`)));
  const ask = <T = void>(message: Record<string, unknown>) =>
    new Promise<T>((resolve, reject) => {
      if (gone) return reject(gone);
      waiting.set(++seq, { resolve: resolve as (value: unknown) => void, reject });
      worker.postMessage({ ...message, seq });
    });
  return {
    /** Every board connected and showing its first whole list. */
    start: () => ask({ type: 'start' }),
    /** Cuts board `index`'s connection if it is up, as a dropped link does; socket.io then reconnects it. */
    drop: (index: number) => ask({ type: 'drop', board: index }),
    /** Every board's whole list once more, five at a time, as after a reload. */
    finalReloads: () => ask({ type: 'final' }),
    report: () => ask<BoardScreensReport>({ type: 'report' }),
    async close() {
      if (!gone) await ask({ type: 'close' }).catch(() => {});
      await worker.terminate();
    },
  };
}
