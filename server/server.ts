import { createServer, type Server as HttpServer } from 'node:http';
import type { AddressInfo } from 'node:net';
import pino, { type Logger } from 'pino';
import type { Knex } from 'knex';
import type { ViteDevServer } from 'vite';
import { createApp } from './app';
import type { Config } from './config';
import { migrate, openDb } from './db';
import { startCheckpoints } from './db-checkpoints';
import { systemClock, type AppDeps, type Clock } from './deps';
import { createSessionMiddleware } from './auth/session';
import { createLocalIdp } from './idp/provider';
import { machineAudienceOf } from './exchange/machine-auth';
import type { LimiterStore } from './limits';
import { signInThrottle } from './auth/sign-in-throttle';
import { createMailer, type Mailer } from './mail';
import { createSmsSender, type SmsSender } from './sms';
import { recordingMailer } from './services/messages/messages';
import { attachSocketFeatures, createRealtime, type RealtimeServer } from './realtime';
import { catchUpLane } from './realtime/catch-up';
import { socketFeatures } from './realtime/features';
import { backgroundJobs } from './services/jobs/jobs';
import { primeCaseLists } from './services/cases/summary';
import { rehearsePreAlerts } from './services/cases/rehearsal';
import { isEmpty, seedDemo } from './services/demo/seed';
import { startKeyedChain } from './services/audit/audit';
import { abandonStagedImports } from './services/outcomes/store';

export interface RunningServer {
  url: string;
  port: number;
  db: Knex;
  io: RealtimeServer;
  mailer: Mailer;
  sms: SmsSender;
  logger: Logger;
  http: HttpServer;
  deps: AppDeps;
  /**
   * Stops everything and resolves within `withinMs` (10 s by default): with the parts still
   * open when the time ran out (logged), or an empty list when all of them closed.
   */
  close(withinMs?: number): Promise<string[]>;
}

/** How long a stop may take before the process gives up waiting and exits anyway. */
export const STOP_WITHIN_MS = 10_000;
/** How long a stop lets a background job's round go on sending mail. */
const JOB_GRACE_MS = 2000;

export interface StartOptions {
  clock?: Clock;
  logger?: Logger;
  mailer?: Mailer;
  db?: Knex;
  /** Serve the client through Vite with hot reload instead of the built files. */
  dev?: boolean;
  /** Run the timed jobs (escalation); tests that need them drive them by hand on a fake clock. */
  backgroundJobs?: boolean;
  /** Where rate limits count; this process's memory unless a shared store is given. */
  limiterStore?: LimiterStore;
  /** Where the built client is served from; the build in dist/client unless given. */
  clientDir?: string;
}

/** Starts the whole product in this process: database, identity provider, mail, HTTP and sockets. */
export async function startServer(config: Config, opts: StartOptions = {}): Promise<RunningServer> {
  const logger = opts.logger ?? pino({ level: config.logLevel, base: undefined });
  const clock = opts.clock ?? systemClock;
  const db = opts.db ?? openDb(config);
  const applied = await migrate(db);
  if (applied.length) logger.info({ applied }, 'database migrated');
  if (config.seedDemo && (await isEmpty(db))) {
    await seedDemo(db, clock);
    logger.info('demo data loaded');
  }
  // A database from before the chain had a key: the keyed part starts here, at a recorded row.
  await startKeyedChain(db, clock.now());
  // An import cut short by a stop left staged rows that never became outcomes.
  const abandoned = await abandonStagedImports(db, clock.now());
  if (abandoned.length) logger.warn({ batches: abandoned }, 'outcomes imports stopped before they were saved; nothing of them was kept');
  // Before anyone can connect: the boards reloading after a restart find their cases ready.
  const primed = await primeCaseLists(db);
  if (primed) logger.info({ cases: primed }, 'open cases ready for the boards');
  // And the pre-alert path compiled, so the outboxes emptying after a restart do not meet cold code.
  const started = Date.now();
  const rehearsed = await rehearsePreAlerts(db, clock).catch((err: unknown) => {
    logger.warn({ err }, 'the pre-alert rehearsal failed; starting without it');
    return 0;
  });
  if (rehearsed) logger.info({ rounds: rehearsed, ms: Date.now() - started }, 'pre-alert path rehearsed');
  // Off the event loop from here on: a checkpoint's fsyncs no longer land inside a pre-alert's commit.
  const checkpoints = opts.db ? null : await startCheckpoints(db, config.databaseFile, logger);

  // Loaded only for a region: a single process never holds the Redis client in memory.
  const redis = config.redisUrl ? await (await import('./redis')).connectRegionRedis(config.redisUrl, config.redisPrefix, logger) : undefined;
  if (redis) logger.info({ prefix: config.redisPrefix }, 'Redis connected: sockets, recovery and rate limits are shared with the other processes');
  const limiterStore = opts.limiterStore ?? redis?.limiterStore;

  const http = createServer();
  await new Promise<void>((resolve, reject) => {
    http.once('error', reject);
    http.listen(config.port, config.host, () => resolve());
  });
  const port = (http.address() as AddressInfo).port;
  const publicUrl = config.publicUrl ?? `http://localhost:${port}`;
  const issuer = config.oidc.issuer ?? `${publicUrl}/idp`;

  const mailer = opts.mailer ?? (await createMailer({ smtpUrl: config.smtpUrl, from: config.mailFrom, db, logger, clock }));
  const sms = await createSmsSender({ config: config.sms, publicUrl, logger });
  if (sms.local) logger.info({ url: sms.fakeUrl }, 'no SMS account configured: the local SMS fake receives pages');
  const sessionMiddleware = createSessionMiddleware({ db, secret: config.sessionSecret, secure: publicUrl.startsWith('https://') });
  const catchUp = catchUpLane();
  const io = createRealtime({ httpServer: http, sessionMiddleware, db, logger, publicOrigin: new URL(publicUrl).origin, catchUp, adapter: redis?.adapter });
  const deps: AppDeps = { config, db, logger, clock, mailer: recordingMailer(mailer, db, clock, logger), sms, publicUrl, sessionMiddleware, io, catchUp, limiterStore, redis };
  attachSocketFeatures(io, socketFeatures(deps));

  const idp = config.oidc.issuer
    ? undefined
    : createLocalIdp({
        issuer,
        db,
        logger,
        dataDir: config.dataDir,
        cookieSecret: config.sessionSecret,
        clock,
        machineAudience: machineAudienceOf(publicUrl),
        throttle: limiterStore ? signInThrottle(limiterStore) : undefined,
        client: { id: config.oidc.clientId, secret: config.oidc.clientSecret, redirectUri: `${publicUrl}/auth/callback`, postLogoutRedirectUri: `${publicUrl}/signed-out` },
      });
  if (idp && publicUrl.startsWith('https://')) idp.provider.proxy = true;

  let vite: ViteDevServer | undefined;
  if (opts.dev) {
    const { createServer: createVite } = await import('vite');
    vite = await createVite({ server: { middlewareMode: true, hmr: { server: http } }, appType: 'spa' });
  }

  const app = createApp({ ...deps, issuer, idpRouter: idp?.router, vite, clientDir: opts.clientDir });
  http.on('request', app);
  const jobs = opts.backgroundJobs === false ? { stop: async () => {} } : backgroundJobs(deps);

  let closing: Promise<string[]> | null = null;
  const closeAll = async (withinMs: number): Promise<string[]> => {
    const open = new Set<string>();
    const step = async (name: string, work: () => Promise<unknown> | unknown) => {
      open.add(name);
      await work();
      open.delete(name);
    };
    const all = (async () => {
      await Promise.all([
        // Sockets and HTTP: socket.io disconnects every socket and closes the HTTP server, which
        // waits for open connections; idle keep-alive ones are closed at once, the rest after 2 s.
        step('sockets and HTTP server', async () => {
          const done = new Promise<void>((resolve) => io.close(() => resolve()));
          http.closeIdleConnections();
          const cut = setTimeout(() => http.closeAllConnections(), 2000);
          await done;
          clearTimeout(cut);
        }),
        // Jobs, then mail: a round under way sends its mail before the mailer closes. A round
        // that takes longer is not waited for: its later sends fail at once on the closed
        // mailer (and are recorded as not sent), and never reach a mail server that is going.
        (async () => {
          const jobsStopped = step('background jobs', () => jobs.stop());
          await Promise.race([jobsStopped, new Promise((resolve) => setTimeout(resolve, JOB_GRACE_MS).unref())]);
          await step('mail', () => mailer.close());
          await step('SMS', () => sms.close());
          await jobsStopped;
        })(),
      ]);
      await step('Redis', () => redis?.close());
      await step('client dev server', () => vite?.close());
      await step('WAL checkpoint thread', () => checkpoints?.stop());
      if (!opts.db) await step('database', () => db.destroy());
    })();
    let timer: NodeJS.Timeout | undefined;
    const late = new Promise<'late'>((resolve) => (timer = setTimeout(() => resolve('late'), withinMs)));
    const outcome = await Promise.race([all.then(() => 'done' as const), late]);
    clearTimeout(timer);
    if (outcome === 'done') return [];
    const left = [...open];
    logger.error({ stillOpen: left, withinMs }, 'the stop did not finish in time; these were still open');
    return left;
  };

  return {
    url: publicUrl,
    port,
    db,
    io,
    mailer,
    sms,
    logger,
    http,
    deps,
    close(withinMs = STOP_WITHIN_MS) {
      closing ??= closeAll(withinMs);
      return closing;
    },
  };
}

/**
 * SIGTERM and SIGINT stop the server; the process exits when the stop has ended or its time
 * ran out, whichever comes first (exit code 1 when something was still open). A second signal
 * exits at once.
 */
export function stopOnSignals(server: Pick<RunningServer, 'close' | 'logger'>, exit: (code: number) => void = (code) => process.exit(code)): void {
  let stopping = false;
  const stop = (signal: NodeJS.Signals) => {
    if (stopping) {
      server.logger.warn({ signal }, 'second stop signal: exiting now');
      exit(1);
      return;
    }
    stopping = true;
    server.logger.info({ signal }, 'stopping');
    // A last guard, in case a close step blocks the event loop itself past the bound.
    setTimeout(() => exit(1), STOP_WITHIN_MS + 500).unref();
    server.close().then(
      (left) => exit(left.length ? 1 : 0),
      (err: unknown) => {
        server.logger.error({ err }, 'the stop failed');
        exit(1);
      },
    );
  };
  process.on('SIGINT', stop);
  process.on('SIGTERM', stop);
}
