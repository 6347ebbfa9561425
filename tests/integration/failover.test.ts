// Two Plumbline processes of one region behind a load balancer (a TCP relay here), one killed
// with SIGKILL in the middle of 300 pre-alerts: its ambulances and boards come back through the
// relay to the other process, and nothing is lost, nothing doubled, and the audit chain holds.
// The processes share one database (PostgreSQL with TEST_DATABASE_URL, else one SQLite file in
// WAL mode) and one Redis (TEST_REDIS_URL).
import { spawn } from 'node:child_process';
import { randomUUID } from 'node:crypto';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { io as connect, type Socket } from 'socket.io-client';
import type { AckResponse, ClientToServerEvents, ServerToClientEvents } from '../../shared/realtime/events';
import type { ClinicalInput } from '../../shared/schemas/clinical';
import { createTestDatabase, onPostgres, type TestDatabase } from '../support/database';
import { signIn } from '../support/sign-in';
import { redisUnavailable, testRedisPrefix, testRedisUrl } from '../support/redis';
import { childServer, freePort, repoRoot, tempDataDir, type ChildServer } from '../bench/support/child-server';
import { startRelay, type Relay } from '../bench/support/relay';
import { boardScreens } from '../bench/support/board-screens';
import { unreadBroadcasts } from '../bench/support/unread-broadcasts';
import { seededRandom, trafficOf } from '../bench/support/traffic';

const unavailable = await redisUnavailable();
if (unavailable) console.warn(`failover.test.ts skipped: ${unavailable}`);

type ClientSocket = Socket<ServerToClientEvents, ClientToServerEvents>;
interface Outgoing { clientId: string; hospitalId: number; unitId: number; clinical: ClinicalInput; sends: number; caseId?: number }
interface Ambulance { socket: ClientSocket; outbox: Map<string, Outgoing>; draining: boolean }

const AMBULANCES = 50;
const BOARDS_PER_HOSPITAL = 3;
const ALERTS = 300;
const SENDS_PER_SECOND = 25;
const KILL_AFTER = 150;

/** The database the region shares: a fresh PostgreSQL database on the PostgreSQL pass, else the SQLite file in the data folder. */
let database: TestDatabase | null = null;
const databaseEnv = (): Record<string, string> => (database ? { DATABASE_URL: database.url } : {});

function runCli(args: string[], env: Record<string, string>): Promise<{ code: number | null; out: string }> {
  const child = spawn(process.execPath, [join(repoRoot, 'server/cli/bin.mjs'), ...args], { cwd: repoRoot, env: { ...process.env, ...env }, stdio: ['ignore', 'pipe', 'pipe'] });
  let out = '';
  child.stdout.setEncoding('utf8').on('data', (c: string) => (out += c));
  child.stderr.setEncoding('utf8').on('data', (c: string) => (out += c));
  return new Promise((resolve) => child.once('exit', (code) => resolve({ code, out })));
}

describe.skipIf(Boolean(unavailable))('failover: two processes, one SIGKILLed mid-run', () => {
  const dataDir = tempDataDir('plumbline-failover-');
  let first: ChildServer | undefined;
  let second: ChildServer | undefined;
  let relay: Relay | undefined;
  let screens: ReturnType<typeof boardScreens> | undefined;
  const sockets: ClientSocket[] = [];

  afterAll(async () => {
    for (const socket of sockets) socket.close();
    await screens?.close();
    await relay?.close();
    await first?.dispose();
    await second?.dispose();
    await database?.drop();
  });

  it('loses none of 300 pre-alerts, doubles none, every board shows each once, and the audit chain verifies', async () => {
    // Both processes share the data folder (its secrets and keys) and the database; the first
    // migrates and loads the demo, the second finds them there.
    database = onPostgres ? await createTestDatabase() : null;
    const env = {
      ...databaseEnv(),
      REDIS_URL: testRedisUrl,
      REDIS_PREFIX: testRedisPrefix(),
      // This file is about failover, not floods: five crew sign-ins carry fifty ambulances.
      CREW_COMMANDS_PER_MINUTE: '100000',
      UNIT_COMMANDS_PER_MINUTE: '100000',
    };
    const ports = [await freePort(), await freePort()];
    relay = await startRelay(ports);
    // People reach the region at the balancer's address.
    first = await childServer({ dataDir, port: ports[0], env: { ...env, PUBLIC_URL: relay.url } });
    second = await childServer({ dataDir, port: ports[1], env: { ...env, PUBLIC_URL: relay.url } });
    await first.start();
    await second.start();
    const url = relay.url;

    const crews = await Promise.all(Array.from({ length: 5 }, () => signIn(url, 'paramedic@plumbline.test')));
    const destinations = await (await crews[0].get('/api/crew/destinations')).json();
    const unitIds: number[] = destinations.units.map((u: { id: number }) => u.id);
    const nurses = ['nurse@plumbline.test', 'fenmoor.nurse@plumbline.test'];
    const boardSpecs: Array<{ url: string; cookie: string; hospitalId: number }> = [];
    for (const email of nurses) {
      for (let i = 0; i < BOARDS_PER_HOSPITAL; i++) {
        // Each board screen is its own session, as the desk and the wall are.
        const nurse = await signIn(url, email);
        const me = await (await nurse.get('/api/me')).json();
        boardSpecs.push({ url, cookie: await nurse.cookieHeader(), hospitalId: me.memberships.find((m: { kind: string }) => m.kind === 'hospital').id });
      }
    }
    const hospitals = [...new Set(boardSpecs.map((b) => b.hospitalId))];
    expect(hospitals).toHaveLength(2);
    expect(unitIds.length).toBeGreaterThan(0);

    // The boards first (on a thread of their own, with the product's reload rule), then the
    // ambulances, one connection at a time: the relay hands them to the two processes in turn.
    screens = boardScreens(boardSpecs);
    await screens.start();
    const cookies = await Promise.all(crews.map((c) => c.cookieHeader()));
    const ambulances: Ambulance[] = [];
    let resends = 0;
    const refusals: string[] = [];
    const sendOne = (amb: Ambulance, item: Outgoing) =>
      new Promise<void>((resolve) => {
        if (item.sends++) resends++;
        amb.socket.timeout(10_000).emit('case:submit', { clientId: item.clientId, hospitalId: item.hospitalId, unitId: item.unitId, etaMinutes: 15, clinical: item.clinical }, (err: Error | null, answer: AckResponse<{ caseId: number }>) => {
          resolve();
          // No answer (the process died, the link was cut): it stays in the outbox and goes again.
          if (err) return;
          if (!answer.ok) {
            refusals.push(`${answer.error.code}: ${answer.error.message}`);
            return;
          }
          // A resend answered after the first must name the same case.
          if (item.caseId !== undefined && item.caseId !== answer.data.caseId) refusals.push(`pre-alert ${item.clientId} answered as case ${item.caseId} and as case ${answer.data.caseId}`);
          item.caseId = answer.data.caseId;
          amb.outbox.delete(item.clientId);
        });
      });
    // The product's outbox: one at a time, in the order made, whenever the link is up.
    const drain = async (amb: Ambulance) => {
      if (amb.draining) return;
      amb.draining = true;
      try {
        for (let item = amb.outbox.values().next().value; item && amb.socket.connected; item = amb.outbox.values().next().value) await sendOne(amb, item);
      } finally {
        amb.draining = false;
      }
    };
    for (let i = 0; i < AMBULANCES; i++) {
      const socket: ClientSocket = connect(url, { transports: ['websocket'], forceNew: true, reconnectionDelayMax: 2000, extraHeaders: { cookie: cookies[i % cookies.length] }, parser: unreadBroadcasts });
      const amb: Ambulance = { socket, outbox: new Map(), draining: false };
      socket.on('connect', () => void drain(amb));
      sockets.push(socket);
      ambulances.push(amb);
      await new Promise<void>((resolve, reject) => {
        socket.once('connect', () => resolve());
        socket.once('connect_error', reject);
      });
    }
    const before = relay.open();
    // Both processes carry ambulances and boards.
    expect(before.get(first.port)).toBeGreaterThanOrEqual(AMBULANCES / 2);
    expect(before.get(second.port)).toBeGreaterThanOrEqual(AMBULANCES / 2);

    const traffic = trafficOf(seededRandom(20261205));
    const sent: Outgoing[] = [];
    const killedPid = first.pid;
    let killed: Promise<void> | null = null;
    for (let n = 0; n < ALERTS; n++) {
      if (n === KILL_AFTER) killed = first.stop('SIGKILL');
      const amb = ambulances[n % AMBULANCES];
      const item: Outgoing = { clientId: randomUUID(), hospitalId: hospitals[n % hospitals.length], unitId: unitIds[n % unitIds.length], clinical: traffic.firstReport(), sends: 0 };
      sent.push(item);
      amb.outbox.set(item.clientId, item);
      void drain(amb);
      await new Promise((r) => setTimeout(r, 1000 / SENDS_PER_SECOND));
    }
    await killed;
    expect(first.pid === killedPid && first.starts).toBe(1);

    // Every outbox empties through the process still running.
    const until = Date.now() + 60_000;
    while (Date.now() < until && ambulances.some((a) => a.outbox.size > 0 || !a.socket.connected)) await new Promise((r) => setTimeout(r, 200));
    expect(refusals).toEqual([]);
    expect(ambulances.filter((a) => a.outbox.size > 0).length).toBe(0);
    expect(sent.every((s) => s.caseId !== undefined)).toBe(true);
    expect(new Set(sent.map((s) => s.caseId)).size).toBe(ALERTS);
    // The killed process's clients came back through the relay to the other one.
    const after = relay.open();
    expect(after.get(first.port)).toBe(0);
    expect(after.get(second.port)).toBeGreaterThanOrEqual(AMBULANCES + boardSpecs.length);

    // What each board shows live, then after a whole reload: every pre-alert of its hospital, as one case.
    await new Promise((r) => setTimeout(r, 1500));
    await screens.finalReloads();
    const report = await screens.report();
    expect(report.failedSnapshots).toBe(0);
    expect(report.foreignDeliveries).toBe(0);
    const problems: string[] = [];
    report.sightings.forEach((sightings, b) => {
      const byClient = new Map(sightings.map((s) => [s.clientId, s]));
      for (const item of sent.filter((s) => s.hospitalId === boardSpecs[b].hospitalId)) {
        const seen = byClient.get(item.clientId);
        if (!seen) problems.push(`board ${b} never showed ${item.clientId}`);
        else if (seen.ids.length !== 1 || seen.ids[0] !== item.caseId) problems.push(`board ${b} showed ${item.clientId} as cases ${seen.ids.join(', ')}`);
      }
    });
    expect(problems).toEqual([]);
    // Live, not only at the reload: most pre-alerts reached the boards as they happened.
    const live = report.sightings.flat().filter((s) => s.live && sent.some((x) => x.clientId === s.clientId)).length;
    expect(live).toBeGreaterThan(ALERTS * BOARDS_PER_HOSPITAL * 0.8);
    console.info(`failover: ${resends} resends, ${report.freshReconnects} fresh and ${report.recoveredReconnects} recovered board reconnects, ${live} live sightings`);

    // The audit chain, after the process still running has stopped, through the CLI.
    await second.stop('SIGTERM');
    const verify = await runCli(['audit', 'verify'], { ...databaseEnv(), DATA_DIR: dataDir, NODE_ENV: 'production', LOG_LEVEL: 'warn' });
    expect(verify.out).toMatch(/^Audit trail OK: \d+ row\(s\) checked/);
    expect(verify.code).toBe(0);
  }, 240_000);
});
