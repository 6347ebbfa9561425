// The floor to compare against: plain socket.io on the same machine in the same run, with no
// sign-in, no database and no evaluation, carrying the same traffic shape — a sender's command
// acknowledged, then one broadcast of a real case summary to a destination's boards and to the
// crews — and timed the same way, from the sender's emit to each board's receipt, with the
// boards on a thread of their own as in the load run (support/board-screens.ts).
import { spawn } from 'node:child_process';
import { createRequire } from 'node:module';
import { Worker } from 'node:worker_threads';
import { createServer } from 'node:http';
import { fileURLToPath } from 'node:url';
import { Server } from 'socket.io';
import { io as connect, type Socket } from 'socket.io-client';
import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { monotonicMs } from './support/board-screens';
import { freePort, tempDataDir } from './support/child-server';
import { unreadBroadcasts } from './support/unread-broadcasts';
import { percentile, round1, seededRandom } from './support/traffic';

export interface BareEchoOptions {
  senders: number;
  listeners: number;
  rooms: number;
  /** Timed messages; the warm-up's come before them. */
  messages: number;
  sendsPerSecond: number;
  /** Sent first and not timed, as the load run leaves out its warm-up (load.ts `warmUpMs`). */
  warmUpMs: number;
  /** Case summaries such as the real server broadcasts: message i carries payload i mod n, so both sides parse the same shapes and sizes. */
  payloads: unknown[];
}

export interface BareEchoResult { p50Ms: number | null; p99Ms: number | null; samples: number; /** Every timed receipt, sorted. */ latencies: number[] }

const require = createRequire(import.meta.url);

// The listening boards: each receipt of a timed message, stamped on the clock every thread shares.
const LISTENERS_THREAD = `
const { parentPort, workerData } = require('node:worker_threads');
const { io } = require(workerData.socketIoClient);
const clock = () => Number(process.hrtime.bigint()) / 1e6;
const receipts = [];
const sockets = workerData.rooms.map((room) => {
  const socket = io(workerData.url, { transports: ['websocket'], forceNew: true, query: { room } });
  socket.on('echoed', (message) => {
    const at = clock();
    if (message.id >= workerData.warmUp) receipts.push([message.id, at]);
  });
  return socket;
});
Promise.all(sockets.map((s) => new Promise((r) => s.once('connect', r)))).then(() => parentPort.postMessage('connected'));
parentPort.on('message', () => {
  for (const socket of sockets) socket.close();
  parentPort.postMessage(receipts);
});
`;

/** The echo server, run as its own process like the real one. */
async function serve(port: number, payloadFile: string): Promise<void> {
  const payloads = JSON.parse(readFileSync(payloadFile, 'utf8')) as unknown[];
  const http = createServer();
  const io = new Server(http, { serveClient: false });
  io.on('connection', (socket) => {
    const room = String(socket.handshake.query.room ?? 'crew');
    void socket.join(room);
    socket.on('echo', (message: { id: number; room: string; note: string }, ack: (answer: { ok: true; data: unknown }) => void) => {
      const echoed = { id: message.id, room: message.room, payload: payloads[message.id % payloads.length] };
      ack({ ok: true, data: echoed });
      queueMicrotask(() => io.to([message.room, 'crew']).emit('echoed', echoed));
    });
  });
  await new Promise<void>((resolve) => http.listen(port, '127.0.0.1', resolve));
  process.send?.('ready');
  process.once('SIGTERM', () => io.close(() => process.exit(0)));
}

export async function measureBareEcho(opts: BareEchoOptions): Promise<BareEchoResult> {
  const port = await freePort();
  const payloadFile = join(tempDataDir('plumbline-echo-'), 'payload.json');
  writeFileSync(payloadFile, JSON.stringify(opts.payloads.length ? opts.payloads : [{}]));
  const child = spawn(process.execPath, ['--import', 'tsx', fileURLToPath(import.meta.url), '--serve', String(port), payloadFile], { stdio: ['ignore', 'ignore', 'inherit', 'ipc'] });
  const exited = new Promise((r) => child.once('exit', r));
  const sockets: Socket[] = [];
  let listeners: Worker | undefined;
  try {
    await new Promise<void>((resolve, reject) => {
      child.once('message', () => resolve());
      child.once('exit', (code) => reject(new Error(`the echo server exited (${code})`)));
    });
    const url = `http://127.0.0.1:${port}`;
    // The senders, as the load run's ambulances, skip the broadcasts they do not read.
    const open = (room: string) => {
      const socket = connect(url, { transports: ['websocket'], forceNew: true, query: { room }, parser: unreadBroadcasts });
      sockets.push(socket);
      return socket;
    };
    const random = seededRandom(7);
    const sentAt = new Map<number, number>();
    const intervalMs = 1000 / opts.sendsPerSecond;
    const warmUp = Math.ceil(opts.warmUpMs / intervalMs);
    const rooms = Array.from({ length: opts.rooms }, (_, i) => `board-${i}`);
    const listenerRooms = Array.from({ length: opts.listeners }, (_, i) => rooms[i % rooms.length]);
    const boards = new Worker(LISTENERS_THREAD, { eval: true, workerData: { url, rooms: listenerRooms, warmUp, socketIoClient: require.resolve('socket.io-client') } });
    listeners = boards;
    const listening = new Promise<void>((resolve, reject) => {
      boards.once('message', () => resolve());
      boards.once('error', reject);
    });
    // Crews hear every broadcast of their agency, as they do on the real server.
    const senders = Array.from({ length: opts.senders }, () => open('crew'));
    await Promise.all([listening, ...sockets.map((s) => (s.connected ? undefined : new Promise((r) => s.once('connect', () => r(undefined)))))]);
    // About the size of a crew's pre-alert [ours].
    const note = 'x'.repeat(400);
    const start = monotonicMs();
    for (let id = 0; id < warmUp + opts.messages; id++) {
      const wait = start + id * intervalMs - monotonicMs();
      if (wait > 0) await new Promise((r) => setTimeout(r, wait));
      const sender = senders[Math.floor(random() * senders.length)];
      sentAt.set(id, monotonicMs());
      sender.timeout(10_000).emit('echo', { id, room: rooms[id % rooms.length], note }, () => {});
    }
    await new Promise((r) => setTimeout(r, 1000));
    const receipts = await new Promise<Array<[id: number, at: number]>>((resolve, reject) => {
      boards.once('message', resolve);
      boards.once('error', reject);
      boards.postMessage('report');
    });
    const samples = receipts.filter(([id]) => sentAt.has(id)).map(([id, at]) => at - sentAt.get(id)!);
    samples.sort((a, b) => a - b);
    return { p50Ms: round1(percentile(samples, 50)), p99Ms: round1(percentile(samples, 99)), samples: samples.length, latencies: samples };
  } finally {
    for (const socket of sockets) socket.close();
    await listeners?.terminate();
    child.kill('SIGTERM');
    await exited;
  }
}

if (process.argv[2] === '--serve') await serve(Number(process.argv[3]), process.argv[4]);
