// Many ambulances and boards on the real server while connections drop and the server process
// dies: every acknowledged pre-alert must reach every board of its destination, once.
import { randomUUID } from 'node:crypto';
import { io as connect, type Socket } from 'socket.io-client';
import type { CaseSummary } from '../../shared/schemas/cases';
import type { ClinicalInput } from '../../shared/schemas/clinical';
import type { AckResponse, ClientToServerEvents, ServerToClientEvents } from '../../shared/realtime/events';
import { createDb } from '../../server/db';
import { verifyAuditChain } from '../../server/services/audit/audit';
import { signIn } from '../support/sign-in';
import { childServer, databaseFileOf, freePort, tempDataDir, type ChildServer } from './support/child-server';
import { startRelay, type Relay } from './support/relay';
import { boardScreens, monotonicMs } from './support/board-screens';
import { unreadBroadcasts } from './support/unread-broadcasts';
import { prepareRegion } from './support/fixtures';
import { percentile, round1, seededRandom, trafficOf } from './support/traffic';

type ClientSocket = Socket<ServerToClientEvents, ClientToServerEvents>;

export interface LoadOptions {
  ambulances: number;
  boards: number;
  hospitals: number;
  /** Signed-in crew sessions the ambulances share (a crew's tablet and phone share one). */
  crewSessions: number;
  alerts: number;
  updates: number;
  sendsPerSecond: number;
  /** Connections cut per second, picked at random among ambulances and boards. */
  dropsPerSecond: number;
  /**
   * The first sends warm the code of the harness and of the server (the JavaScript engine compiles
   * a path once it runs often). They are counted for delivery but not timed; the echo leaves out
   * its first sends the same way (bare-echo.ts).
   */
  warmUpMs: number;
  /** How long, after the last send, the ambulances may take to empty their outboxes. */
  settleMs: number;
  /**
   * Two server processes on the one database and a Redis, behind a TCP relay that hands each
   * connection to the next process (support/relay.ts); each fault then hits one process.
   */
  cluster: { redisUrl: string; redisPrefix: string } | null;
  log(line: string): void;
}

export const defaultLoadOptions: LoadOptions = {
  ambulances: 200,
  boards: 20,
  hospitals: 4,
  crewSessions: 5,
  alerts: 1000,
  updates: 300,
  sendsPerSecond: 20,
  dropsPerSecond: 1,
  warmUpMs: 2000,
  settleMs: 45_000,
  cluster: null,
  log: () => {},
};

export interface LoadResult {
  /** Server processes serving the run (2 with --cluster). */
  processes: number;
  ambulances: number;
  boards: number;
  hospitals: number;
  alerts: number;
  acknowledged: number;
  unacknowledged: number;
  delivered: number;
  lost: number;
  duplicated: number;
  missingInDatabase: number;
  updates: number;
  updatesAcknowledged: number;
  updatesLost: number;
  alertsRefused: number;
  updatesRefused: number;
  foreignDeliveries: number;
  resent: number;
  drops: number;
  restarts: number;
  restartKinds: string[];
  freshReconnects: number;
  recoveredReconnects: number;
  snapshots: number;
  p50Ms: number | null;
  p99Ms: number | null;
  /** The p99 of the samples sent away from the restarts (from each stop to 10 s after the server answers again). */
  steadyP99Ms: number | null;
  samplesNearRestarts: number;
  /** Pre-alerts that waited in an outbox, timed from their first send once the link was back. */
  outbox: { samples: number; p50Ms: number | null; p99Ms: number | null };
  auditChain: { ok: boolean; rows: number; brokenAt?: number };
  latencySamples: number;
  /** The mean length of a broadcast summary's JSON, in characters. */
  summaryChars: number;
  durationS: number;
}

interface Outgoing {
  clientId: string;
  hospitalId: number;
  clinical: ClinicalInput;
  /** When each send went, in order: a board's sighting is timed only if exactly one had gone before it. */
  emits: number[];
  /** Made while its ambulance had no link (the server restarting, a cut): it waited in the outbox. */
  madeOffline: boolean;
  /** Sent while the run warms up: counted, not timed. */
  warmUp: boolean;
  ack?: { caseId: number; caseNumber: string };
}

interface Ambulance {
  socket: ClientSocket;
  /** What waits for an acknowledgement, in the order made. */
  outbox: Map<string, Outgoing>;
  /** Sending from the outbox now: one pre-alert at a time. */
  draining: boolean;
  cases: Array<{ caseId: number; clinical: ClinicalInput; updates: number; busy: boolean }>;
}

/** The boards run on their own thread (support/board-screens.ts); their clock is this one. */
const now = monotonicMs;

/** The load run's traffic comes from this seed: the same run sends the same pre-alerts every time. */
export const LOAD_SEED = 20261209;

/** How long after a restarted server answers its reconnect storm is counted as near the restart [ours]. */
const RESTART_WINDOW_MS = 10_000;

function openSocket(url: string, cookie: string): ClientSocket {
  // The product's own client settings (src/api/socket.ts): socket.io reconnects by itself. An
  // ambulance acts on its acknowledgements and skips the broadcasts unread (support/unread-broadcasts.ts).
  return connect(url, { transports: ['websocket'], forceNew: true, reconnectionDelayMax: 5000, extraHeaders: { cookie }, parser: unreadBroadcasts });
}

function connected(socket: ClientSocket): Promise<void> {
  if (socket.connected) return Promise.resolve();
  return new Promise((resolve, reject) => {
    const timer = setTimeout(() => reject(new Error('no connection within 20 s')), 20_000);
    socket.once('connect', () => {
      clearTimeout(timer);
      resolve();
    });
  });
}

async function inBatches<T>(items: T[], size: number, run: (item: T) => Promise<unknown>): Promise<void> {
  for (let i = 0; i < items.length; i += size) await Promise.all(items.slice(i, i + size).map(run));
}

export async function runLoad(partial: Partial<LoadOptions> = {}): Promise<LoadResult> {
  const opts = { ...defaultLoadOptions, ...partial };
  const { log } = opts;
  const random = seededRandom(LOAD_SEED);
  const traffic = trafficOf(random);
  const dataDir = tempDataDir();
  const region = await prepareRegion(dataDir, { hospitals: opts.hospitals, paramedics: opts.crewSessions });
  // The run's ambulances share a few sign-ins (opts.crewSessions), so each sign-in carries the
  // sends of many ambulances: its per-account limit is raised to what it is asked to carry, with
  // room to spare. No send names a unit, so the per-unit limit does not apply.
  const perSession = Math.ceil((opts.sendsPerSecond * 60) / opts.crewSessions) * 4;
  const env = { CREW_COMMANDS_PER_MINUTE: String(perSession) };
  let servers: ChildServer[];
  let relay: Relay | null = null;
  if (opts.cluster) {
    const ports = [await freePort(), await freePort()];
    relay = await startRelay(ports);
    const regionEnv = { ...env, REDIS_URL: opts.cluster.redisUrl, REDIS_PREFIX: opts.cluster.redisPrefix, PUBLIC_URL: relay.url };
    // A process that starts while the other one carries the whole load may take longer to answer [ours].
    servers = await Promise.all(ports.map((port) => childServer({ dataDir, port, env: regionEnv, startTimeoutMs: 120_000 })));
  } else {
    servers = [await childServer({ dataDir, env })];
  }
  // Where the clients connect: the one server, or the relay in front of the two.
  const server = { url: relay?.url ?? servers[0].url };
  const sockets: ClientSocket[] = [];
  let screens: ReturnType<typeof boardScreens> | undefined;
  const started = now();
  try {
    // One after the other: the first migrates the database, the second finds it done.
    for (const one of servers) {
      await one.start();
      log(`load: server up at ${one.url} (pid ${one.pid})`);
    }

    const crews = await Promise.all(region.paramedicEmails.map((email) => signIn(server.url, email)));
    // Two screens per ED (the desk and the wall), each its own session, as in a real department.
    const boardSessions = await Promise.all(region.hospitals.flatMap((h) => [signIn(server.url, h.nurseEmail), signIn(server.url, h.nurseEmail)]));
    const crewCookies = await Promise.all(crews.map((c) => c.cookieHeader()));

    const outgoing = new Map<string, Outgoing>();
    const updatesAcked: Array<{ caseId: number; clientId: string; hospitalId: number; revision: number }> = [];
    let alertsRefused = 0;
    let updatesRefused = 0;
    let resent = 0;
    let updatesSent = 0;
    let freshReconnects = 0;
    let recoveredReconnects = 0;
    /** The latency samples, each with its send time, to tell the seconds around a restart from the rest. */
    const timed: Array<{ at: number; ms: number }> = [];
    /** From each stop of the server to ten seconds after it answers again [ours]. */
    const restartWindows: Array<{ from: number; to: number }> = [];
    const outboxLatencies: number[] = [];
    const ambulances: Ambulance[] = [];
    const idOfCase = new Map<number, string>();

    /** One send of one pre-alert; resolves once it is answered, refused, timed out or cut off. */
    const sendAlert = (amb: Ambulance, item: Outgoing) =>
      new Promise<void>((resolve) => {
        if (item.emits.length) resent++;
        item.emits.push(now());
        const payload = { clientId: item.clientId, hospitalId: item.hospitalId, etaMinutes: traffic.between(5, 40), clinical: item.clinical };
        amb.socket.timeout(10_000).emit('case:submit', payload, (err: Error | null, answer: AckResponse<{ caseId: number; caseNumber: string; created: boolean; summary: CaseSummary }>) => {
          resolve();
          if (item.ack) {
            // A resend answered after the first: it must name the same case.
            if (!err && answer.ok && answer.data.caseId !== item.ack.caseId) item.ack = { ...item.ack, caseId: -1 };
            return;
          }
          // Cut off: the reconnect sends it again. Timed out on a live link: the outbox sends it again now.
          if (err) return;
          if (!answer.ok) {
            alertsRefused++;
            log(`load: pre-alert refused: ${answer.error.code} ${answer.error.message}`);
            amb.outbox.delete(item.clientId);
            return;
          }
          item.ack = { caseId: answer.data.caseId, caseNumber: answer.data.caseNumber };
          idOfCase.set(answer.data.caseId, item.clientId);
          amb.outbox.delete(item.clientId);
          amb.cases.push({ caseId: answer.data.caseId, clinical: item.clinical, updates: 0, busy: false });
        });
      });

    // The product's outbox (src/stores/outbox.ts): one at a time, in the order made, each
    // after the last one's answer, whenever the link is up.
    const drain = async (amb: Ambulance) => {
      if (amb.draining) return;
      amb.draining = true;
      try {
        for (let next = amb.outbox.values().next().value; next && amb.socket.connected; next = amb.outbox.values().next().value) {
          if (next.ack) amb.outbox.delete(next.clientId);
          else await sendAlert(amb, next);
        }
      } finally {
        amb.draining = false;
      }
    };

    // Two screens per ED (the desk and the wall) ride on the two sessions of its nurse.
    const boardHospitals: number[] = [];
    const boardSpecs: Array<{ url: string; cookie: string; hospitalId: number }> = [];
    for (const [h, hospital] of region.hospitals.entries()) {
      const perHospital = Math.floor(opts.boards / region.hospitals.length) + (h < opts.boards % region.hospitals.length ? 1 : 0);
      for (let i = 0; i < perHospital; i++) {
        boardHospitals.push(hospital.id);
        boardSpecs.push({ url: server.url, cookie: await boardSessions[h * 2 + (i % 2)].cookieHeader(), hospitalId: hospital.id });
      }
    }
    const boards = (screens = boardScreens(boardSpecs));

    for (let i = 0; i < opts.ambulances; i++) {
      const amb: Ambulance = { socket: openSocket(server.url, crewCookies[i % crewCookies.length]), outbox: new Map(), draining: false, cases: [] };
      let first = true;
      amb.socket.on('connect', () => {
        if (!first) {
          if (amb.socket.recovered) recoveredReconnects++;
          else freshReconnects++;
        }
        first = false;
        // The outbox rule: whatever was not acknowledged goes again when the link is back.
        void drain(amb);
      });
      amb.socket.on('disconnect', (reason) => {
        if (reason === 'io server disconnect') amb.socket.connect();
      });
      ambulances.push(amb);
      sockets.push(amb.socket);
    }
    // The run starts with every board up, showing the cases it had, as at the start of a shift.
    await Promise.all([inBatches(sockets, 50, connected), boards.start()]);
    log(`load: ${ambulances.length} ambulances and ${boardSpecs.length} boards connected`);

    // The schedule: a steady rate of sends; two restarts of the server process, the first a kill -9.
    const total = opts.alerts + opts.updates;
    const intervalMs = 1000 / opts.sendsPerSecond;
    const restartAt = [Math.floor(total * 0.3), Math.floor(total * 0.65)];
    const restartKinds: string[] = [];
    const faults: { restarting: Promise<void> | null } = { restarting: null };
    let drops = 0;
    let alertsSent = 0;
    const dropTimer = setInterval(() => {
      for (let k = 0; k < Math.max(1, Math.round(opts.dropsPerSecond / 2)); k++) {
        if (random() < 0.15) {
          // Counted on the boards' thread, if it was up; a thread that died fails the report below.
          boards.drop(Math.floor(random() * boardSpecs.length)).catch(() => {});
          continue;
        }
        const victim = ambulances[Math.floor(random() * ambulances.length)].socket;
        if (!victim.connected) continue;
        (victim.io as unknown as { engine: { close(): void } }).engine.close();
        drops++;
      }
    }, 2000 / Math.max(1, opts.dropsPerSecond));

    const restart = (signal: NodeJS.Signals) => {
      // With two processes, the first fault hits the first and the second the other.
      const target = servers[restartKinds.length % servers.length];
      restartKinds.push(signal);
      const pid = target.pid;
      const from = now();
      faults.restarting = (async () => {
        await target.stop(signal);
        log(`load: server ${pid} stopped by ${signal}; starting again on the same port and file`);
        await target.start();
        restartWindows.push({ from, to: now() + RESTART_WINDOW_MS });
        log(`load: server up again (pid ${target.pid})`);
      })().finally(() => {
        faults.restarting = null;
      });
    };

    const sendStart = now();
    const maxTicks = total * 2;
    for (let tick = 0; (alertsSent < opts.alerts || updatesSent < opts.updates) && tick < maxTicks; tick++) {
      const wait = sendStart + tick * intervalMs - now();
      if (wait > 0) await new Promise((r) => setTimeout(r, wait));
      if (tick === restartAt[0]) restart('SIGKILL');
      if (tick === restartAt[1]) {
        if (faults.restarting) await faults.restarting;
        restart('SIGTERM');
      }
      const wantUpdate = updatesSent < opts.updates && (alertsSent >= opts.alerts || random() < opts.updates / total);
      const candidates = wantUpdate ? ambulances.filter((a) => a.socket.connected && a.cases.some((c) => c.updates < 2 && !c.busy)) : [];
      if (candidates.length) {
        const amb = candidates[Math.floor(random() * candidates.length)];
        // One update of a case at a time, as from one crew's screen.
        const open = amb.cases.filter((c) => c.updates < 2 && !c.busy);
        const target = open[Math.floor(random() * open.length)];
        target.updates++;
        target.busy = true;
        target.clinical = traffic.update(target.clinical);
        updatesSent++;
        const clientId = idOfCase.get(target.caseId)!;
        const hospitalId = outgoing.get(clientId)!.hospitalId;
        // Updates carry no client id, so they are not resent blindly; only acknowledged ones are checked.
        amb.socket.timeout(10_000).emit('case:update', { caseId: target.caseId, etaMinutes: traffic.between(2, 30), clinical: target.clinical }, (err: Error | null, answer: AckResponse<{ summary: CaseSummary }>) => {
          target.busy = false;
          if (err) return;
          if (!answer.ok) {
            updatesRefused++;
            log(`load: update refused: ${answer.error.code} ${answer.error.message}`);
            return;
          }
          updatesAcked.push({ caseId: target.caseId, clientId, hospitalId, revision: answer.data.summary.revision });
        });
        continue;
      }
      // Nothing to update yet (the link is down): this tick passes.
      if (alertsSent >= opts.alerts) continue;
      const amb = ambulances[Math.floor(random() * ambulances.length)];
      const item: Outgoing = { clientId: randomUUID(), hospitalId: region.hospitals[alertsSent % region.hospitals.length].id, clinical: traffic.firstReport(), emits: [], madeOffline: !amb.socket.connected, warmUp: tick * intervalMs < opts.warmUpMs };
      alertsSent++;
      outgoing.set(item.clientId, item);
      amb.outbox.set(item.clientId, item);
      void drain(amb);
    }
    clearInterval(dropTimer);
    if (faults.restarting) await faults.restarting;
    log(`load: ${alertsSent} pre-alerts and ${updatesSent} updates sent in ${((now() - sendStart) / 1000).toFixed(1)} s; waiting for outboxes to empty`);

    const settleUntil = now() + opts.settleMs;
    while (now() < settleUntil && ambulances.some((a) => a.outbox.size > 0 || !a.socket.connected)) await new Promise((r) => setTimeout(r, 200));
    // The last broadcasts, then every board's final snapshot, as after a reload.
    await new Promise((r) => setTimeout(r, 1500));
    await boards.finalReloads();
    const seen = await boards.report();
    if (seen.failedSnapshots) log(`load: ${seen.failedSnapshots} board reloads failed 40 times over`);
    freshReconnects += seen.freshReconnects;
    recoveredReconnects += seen.recoveredReconnects;
    const seenBy = seen.sightings.map((list) => new Map(list.map((s) => [s.clientId, s])));

    // Each board's first sighting of a pre-alert, by a live broadcast on a board that stayed
    // connected, after exactly one send (not across a cut or a restart), after the warm-up: a
    // latency sample. Deliveries otherwise are counted, not timed; a pre-alert that waited in an
    // outbox is timed apart, from its first send on the restored link.
    for (const sightings of seen.sightings) {
      for (const s of sightings) {
        const sent = outgoing.get(s.clientId);
        if (!sent || !s.live || sent.warmUp) continue; // A demo case, not one of ours; or not timed.
        const before = sent.emits.filter((t) => t <= s.at);
        if (before.length !== 1 || !(s.connectedAt < before[0])) continue;
        if (sent.madeOffline) outboxLatencies.push(s.at - before[0]);
        else timed.push({ at: before[0], ms: s.at - before[0] });
      }
    }

    const acked = [...outgoing.values()].filter((o) => o.ack);
    let lost = 0;
    let delivered = 0;
    for (const item of acked) {
      const mine = seenBy.filter((_, b) => boardHospitals[b] === item.hospitalId);
      if (mine.every((m) => m.has(item.clientId))) delivered++;
      else lost++;
    }
    const sawTwice = seen.sightings.flat().filter((s) => s.ids.length > 1).length;
    const answeredTwoWays = acked.filter((o) => o.ack!.caseId === -1).length;
    let updatesLost = 0;
    for (const update of updatesAcked) {
      const mine = seenBy.filter((_, b) => boardHospitals[b] === update.hospitalId);
      if (!mine.every((m) => (m.get(update.clientId)?.revision ?? 0) >= update.revision)) updatesLost++;
    }

    // The database's own count: one case per client id, and every acknowledged one is there.
    const db = createDb(databaseFileOf(dataDir));
    let dbCases = 0;
    let dbDistinct = 0;
    let missingInDatabase = 0;
    let auditChain: { ok: boolean; rows: number; brokenAt?: number } = { ok: false, rows: 0 };
    try {
      const ids = [...outgoing.keys()];
      const ackedIds = new Set(acked.map((o) => o.clientId));
      const found = new Set<string>();
      for (let i = 0; i < ids.length; i += 500) {
        const rows = (await db('cases').whereIn('client_id', ids.slice(i, i + 500)).select('client_id')) as Array<{ client_id: string }>;
        dbCases += rows.length;
        for (const row of rows) found.add(row.client_id);
      }
      dbDistinct = found.size;
      for (const id of ackedIds) if (!found.has(id)) missingInDatabase++;
      // Kills, restarts and cut connections must not leave a hole or a half-written row in the chain.
      const chain = await verifyAuditChain(db);
      auditChain = chain.ok ? { ok: true, rows: chain.rows } : { ok: false, rows: chain.rows, brokenAt: chain.brokenAt };
    } finally {
      await db.destroy();
    }

    const latencies = timed.map((t) => t.ms).sort((a, b) => a - b);
    outboxLatencies.sort((a, b) => a - b);
    const nearRestart = (at: number) => restartWindows.some((w) => at >= w.from && at < w.to);
    const steady = timed.filter((t) => !nearRestart(t.at)).map((t) => t.ms).sort((a, b) => a - b);
    return {
      processes: servers.length,
      ambulances: ambulances.length,
      boards: boardSpecs.length,
      hospitals: region.hospitals.length,
      alerts: alertsSent,
      acknowledged: acked.length,
      unacknowledged: alertsSent - acked.length - alertsRefused,
      delivered,
      lost,
      duplicated: dbCases - dbDistinct + sawTwice + answeredTwoWays,
      missingInDatabase,
      auditChain,
      updates: updatesSent,
      updatesAcknowledged: updatesAcked.length,
      updatesLost,
      alertsRefused,
      updatesRefused,
      foreignDeliveries: seen.foreignDeliveries,
      resent,
      drops: drops + seen.drops,
      restarts: restartKinds.length,
      restartKinds,
      freshReconnects,
      recoveredReconnects,
      snapshots: seen.snapshots,
      p50Ms: round1(percentile(latencies, 50)),
      p99Ms: round1(percentile(latencies, 99)),
      steadyP99Ms: round1(percentile(steady, 99)),
      samplesNearRestarts: timed.length - steady.length,
      outbox: { samples: outboxLatencies.length, p50Ms: round1(percentile(outboxLatencies, 50)), p99Ms: round1(percentile(outboxLatencies, 99)) },
      latencySamples: latencies.length,
      summaryChars: seen.summaryCount ? Math.round(seen.summaryChars / seen.summaryCount) : 0,
      durationS: round1((now() - started) / 1000)!,
    };
  } finally {
    for (const socket of sockets) socket.close();
    await screens?.close();
    await relay?.close();
    for (const one of servers) await one.dispose();
  }
}
