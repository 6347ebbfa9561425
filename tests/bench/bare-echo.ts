// The floor to compare against: plain socket.io on the same machine in the same run, with no
// sign-in, no database and no evaluation, carrying the same traffic shape — a sender's command
// acknowledged, then one broadcast of a real case summary to a destination's boards and to the
// crews — and timed the same way, from the sender's emit to each board's receipt.
import { performance } from 'node:perf_hooks';
import { spawn } from 'node:child_process';
import { createServer } from 'node:http';
import { fileURLToPath } from 'node:url';
import { Server } from 'socket.io';
import { io as connect, type Socket } from 'socket.io-client';
import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { freePort, tempDataDir } from './support/child-server';
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
  try {
    await new Promise<void>((resolve, reject) => {
      child.once('message', () => resolve());
      child.once('exit', (code) => reject(new Error(`the echo server exited (${code})`)));
    });
    const url = `http://127.0.0.1:${port}`;
    const open = (room: string) => {
      const socket = connect(url, { transports: ['websocket'], forceNew: true, query: { room } });
      sockets.push(socket);
      return socket;
    };
    const random = seededRandom(7);
    const sentAt = new Map<number, number>();
    const samples: number[] = [];
    const intervalMs = 1000 / opts.sendsPerSecond;
    const warmUp = Math.ceil(opts.warmUpMs / intervalMs);
    const rooms = Array.from({ length: opts.rooms }, (_, i) => `board-${i}`);
    for (let i = 0; i < opts.listeners; i++) {
      open(rooms[i % rooms.length]).on('echoed', (message: { id: number }) => {
        if (message.id < warmUp) return;
        const at = sentAt.get(message.id);
        if (at !== undefined) samples.push(performance.now() - at);
      });
    }
    // Crews hear every broadcast of their agency, as they do on the real server.
    const senders = Array.from({ length: opts.senders }, () => open('crew'));
    await Promise.all(sockets.map((s) => (s.connected ? undefined : new Promise((r) => s.once('connect', () => r(undefined))))));
    // About the size of a crew's pre-alert [ours].
    const note = 'x'.repeat(400);
    const start = performance.now();
    for (let id = 0; id < warmUp + opts.messages; id++) {
      const wait = start + id * intervalMs - performance.now();
      if (wait > 0) await new Promise((r) => setTimeout(r, wait));
      const sender = senders[Math.floor(random() * senders.length)];
      sentAt.set(id, performance.now());
      sender.timeout(10_000).emit('echo', { id, room: rooms[id % rooms.length], note }, () => {});
    }
    await new Promise((r) => setTimeout(r, 1000));
    samples.sort((a, b) => a - b);
    return { p50Ms: round1(percentile(samples, 50)), p99Ms: round1(percentile(samples, 99)), samples: samples.length, latencies: samples };
  } finally {
    for (const socket of sockets) socket.close();
    child.kill('SIGTERM');
    await exited;
  }
}

if (process.argv[2] === '--serve') await serve(Number(process.argv[3]), process.argv[4]);
