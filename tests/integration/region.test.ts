// Two server processes' worth of the product on one database and one Redis: what one process
// does, the other's sockets hear, and a limit counts across both. Readiness names what fails.
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { randomUUID } from 'node:crypto';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { CaseSummary } from '../../shared/schemas/cases';
import { createTestDatabase, onPostgres, type TestDatabase } from '../support/database';
import { startTestServer, type TestServer } from '../support/server';
import { signIn } from '../support/sign-in';
import { command, connectAs, nextEvent, type TestSocket } from '../support/socket';
import { redisUnavailable, testRedisPrefix, testRedisUrl } from '../support/redis';
import { io as connect } from 'socket.io-client';
import { freePort } from '../bench/support/child-server';
import { startRelay } from '../bench/support/relay';

const unavailable = await redisUnavailable();
if (unavailable) console.warn(`region.test.ts skipped: ${unavailable}`);

// A fall over 10 ft is 2021 moderate risk [source: Newgard 2022, as in pre-alert.test.ts].
const ladderFall = { ageYears: 41, sex: 'male', fall: { heightM: 3.5, surface: 'concrete' }, vitals: { sbp: 132, hr: 90 } };

describe.skipIf(Boolean(unavailable))('several processes on one database and one Redis', () => {
  const dataDir = mkdtempSync(join(tmpdir(), 'plumbline-region-'));
  const prefix = testRedisPrefix();
  // Both on the same SQLite file, as two processes of one region; three commands a minute per account.
  // On the PostgreSQL pass, one test database for both.
  const shared = { dataDir, redisUrl: testRedisUrl, redisPrefix: prefix, crewCommandLimits: { perAccountPerMinute: 3, perUnitPerMinute: 100 } };
  let database: TestDatabase | null = null;
  let a: TestServer;
  let b: TestServer;
  const sockets: TestSocket[] = [];
  let general: number;

  beforeAll(async () => {
    database = onPostgres ? await createTestDatabase() : null;
    a = await startTestServer({ ...shared, ...(database ? { databaseUrl: database.url } : {}) });
    b = await startTestServer({ ...shared, ...(database ? { databaseUrl: database.url } : {}) });
    general = (await a.db('hospitals').where({ name: 'Alderwick General Hospital' }).first('id')).id;
  }, 60_000);
  afterAll(async () => {
    for (const socket of sockets) socket.close();
    await a?.close();
    await b?.close();
    await database?.drop();
    rmSync(dataDir, { recursive: true, force: true });
  });

  it('reports ready with the database and Redis answering', async () => {
    const res = await fetch(`${a.url}/api/health/ready`);
    expect(res.status).toBe(200);
    expect(await res.json()).toEqual({ ready: true, database: 'ok', redis: 'ok' });
  });

  it('a board on one process hears a pre-alert sent to the other, once', async () => {
    const crew = await connectAs(a.url, await signIn(a.url, 'paramedic@plumbline.test'));
    const board = await connectAs(b.url, await signIn(b.url, 'nurse@plumbline.test'));
    sockets.push(crew, board);
    const clientId = randomUUID();
    const heard: CaseSummary[] = [];
    board.on('case:submitted', (summary) => void (summary.clientId === clientId && heard.push(summary)));
    const seen = nextEvent<[CaseSummary]>(board, 'case:submitted', 5000, (s) => s.clientId === clientId);
    const answer = await command<{ caseId: number }>(crew, 'case:submit', { clientId, hospitalId: general, etaMinutes: 12, clinical: ladderFall });
    expect(answer.ok).toBe(true);
    const [summary] = await seen;
    expect(summary.id).toBe(answer.ok && answer.data.caseId);
    await new Promise((r) => setTimeout(r, 500));
    expect(heard).toHaveLength(1);
  });

  it('a board cut off from one process recovers its missed pre-alert on the other (connection-state recovery across processes)', async () => {
    // The balancer: the first connection to the first process, the next to the second.
    const relay = await startRelay([a.port, b.port]);
    try {
      const nurse = await signIn(a.url, 'nurse@plumbline.test');
      const board = connect(relay.url, { transports: ['websocket'], forceNew: true, reconnectionDelay: 100, reconnectionDelayMax: 200, extraHeaders: { cookie: await nurse.cookieHeader() } }) as TestSocket;
      sockets.push(board);
      await nextEvent(board, 'session:ready', 5000);
      expect(relay.open().get(a.port)).toBe(1);
      const crew = await connectAs(b.url, await signIn(b.url, 'paramedic@plumbline.test'));
      sockets.push(crew);
      // Recovery resumes from the last broadcast the board had: one arrives first, from the other process.
      const firstId = randomUUID();
      const heard = nextEvent<[CaseSummary]>(board, 'case:submitted', 5000, (s) => s.clientId === firstId);
      expect((await command(crew, 'case:submit', { clientId: firstId, hospitalId: general, etaMinutes: 20, clinical: ladderFall })).ok).toBe(true);
      await heard;
      // The board's link drops (its process stays up, and keeps its session for recovery) ...
      const away = new Promise<void>((resolve) => board.once('disconnect', () => resolve()));
      (board.io as unknown as { engine: { close(): void } }).engine.close();
      await away;
      // ... a pre-alert is sent meanwhile on the other process ...
      const clientId = randomUUID();
      const missed = new Promise<CaseSummary>((resolve) => board.on('case:submitted', (summary) => summary.clientId === clientId && resolve(summary)));
      const sent = await command<{ caseId: number }>(crew, 'case:submit', { clientId, hospitalId: general, etaMinutes: 14, clinical: ladderFall });
      expect(sent.ok).toBe(true);
      // ... and the board, reconnected through the relay to the second process, is handed it there.
      const back = new Promise<void>((resolve) => board.once('connect', () => resolve()));
      await back;
      expect(relay.made().get(b.port)).toBe(1);
      expect(board.recovered).toBe(true);
      expect((await missed).id).toBe(sent.ok && sent.data.caseId);
    } finally {
      await relay.close();
    }
  });

  it("moves a nurse's socket on one process to her new hospital when an administrator on the other changes her places", async () => {
    const community = (await a.db('hospitals').where({ name: 'Fenmoor Community Hospital' }).first('id')).id;
    const nurse = await a.db('users').where({ email: 'fenmoor.nurse@plumbline.test' }).first('id');
    const board = await connectAs(b.url, await signIn(b.url, 'fenmoor.nurse@plumbline.test'));
    sockets.push(board);
    const rooms = async () => ((await board.timeout(5000).emitWithAck('session:rooms')) as { data: { rooms: string[] } }).data.rooms.sort();
    expect(await rooms()).toEqual([`hospital:${community}`, `user:${nurse.id}`]);
    const admin = await signIn(a.url, 'admin@plumbline.test');
    expect((await admin.send('PATCH', `/api/people/users/${nurse.id}`, { memberships: [{ kind: 'hospital', id: general }] })).status).toBe(200);
    let now = await rooms();
    for (let i = 0; i < 20 && now.includes(`hospital:${community}`); i++) now = (await new Promise((r) => setTimeout(r, 100)), await rooms());
    expect(now).toEqual([`hospital:${general}`, `user:${nurse.id}`]);
  });

  it("counts one account's pre-alerts across both processes: the fourth in a minute is refused on either process", async () => {
    const medic = await signIn(a.url, 'paramedic@plumbline.test');
    const onA = await connectAs(a.url, medic);
    const onB = await connectAs(b.url, await signIn(b.url, 'paramedic@plumbline.test'));
    sockets.push(onA, onB);
    // The tests before sent three from this account.
    const send = (socket: TestSocket) => command(socket, 'case:submit', { clientId: randomUUID(), hospitalId: general, etaMinutes: 9, clinical: ladderFall });
    const refused = await send(onA);
    expect(refused.ok).toBe(false);
    expect(!refused.ok && refused.error.code).toBe('rate_limited');
    const alsoRefused = await send(onB);
    expect(!alsoRefused.ok && alsoRefused.error.code).toBe('rate_limited');
  });
});

const redisBinary = spawnSync('redis-server', ['--version']).status === 0;
describe.skipIf(!redisBinary)('readiness when Redis goes away', () => {
  let redis: ChildProcess | null = null;
  let port: number;
  let server: TestServer;
  const startRedis = async () => {
    redis = spawn('redis-server', ['--port', String(port), '--bind', '127.0.0.1', '--save', '', '--appendonly', 'no'], { stdio: 'ignore' });
    for (let i = 0; i < 50 && (await redisUnavailable(`redis://127.0.0.1:${port}`)); i++) await new Promise((r) => setTimeout(r, 100));
  };
  const stopRedis = async () => {
    const proc = redis;
    redis = null;
    if (!proc || proc.exitCode !== null) return;
    const gone = new Promise((r) => proc.once('exit', r));
    proc.kill('SIGKILL');
    await gone;
  };
  const ready = async () => {
    const res = await fetch(`${server.url}/api/health/ready`);
    return { status: res.status, body: await res.json() };
  };

  beforeAll(async () => {
    port = await freePort();
    await startRedis();
    server = await startTestServer({ redisUrl: `redis://127.0.0.1:${port}`, redisPrefix: testRedisPrefix() });
  }, 60_000);
  afterAll(async () => {
    await server?.close();
    await stopRedis();
  });

  it('answers 503 naming Redis while it is away, still stores and acknowledges pre-alerts, and is ready again when it is back', async () => {
    expect((await ready()).status).toBe(200);
    await stopRedis();
    let answer = await ready();
    for (let i = 0; i < 20 && answer.status === 200; i++) answer = (await new Promise((r) => setTimeout(r, 100)), await ready());
    expect(answer.status).toBe(503);
    expect(answer.body).toMatchObject({ ready: false, database: 'ok', failed: ['redis'] });
    expect(answer.body.redis).toMatch(/^failed: /);

    // The rate limit counts in this process meanwhile; the pre-alert is not held up by the missing counter.
    const crew = await connectAs(server.url, await signIn(server.url, 'paramedic@plumbline.test'));
    const general = (await server.db('hospitals').where({ name: 'Alderwick General Hospital' }).first('id')).id;
    const sent = await command(crew, 'case:submit', { clientId: randomUUID(), hospitalId: general, etaMinutes: 10, clinical: ladderFall });
    crew.close();
    expect(sent.ok).toBe(true);

    await startRedis();
    answer = await ready();
    for (let i = 0; i < 50 && answer.status !== 200; i++) answer = (await new Promise((r) => setTimeout(r, 100)), await ready());
    expect(answer).toEqual({ status: 200, body: { ready: true, database: 'ok', redis: 'ok' } });
  }, 30_000);
});
