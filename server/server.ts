import { createServer, type Server as HttpServer } from 'node:http';
import type { AddressInfo } from 'node:net';
import pino, { type Logger } from 'pino';
import type { Knex } from 'knex';
import type { ViteDevServer } from 'vite';
import { createApp } from './app';
import type { Config } from './config';
import { createDb, migrate } from './db';
import { startCheckpoints } from './db-checkpoints';
import { systemClock, type AppDeps, type Clock } from './deps';
import { createSessionMiddleware } from './auth/session';
import { createLocalIdp } from './idp/provider';
import type { LimiterStore } from './limits';
import { createMailer, type Mailer } from './mail';
import { attachSocketFeatures, createRealtime, type RealtimeServer } from './realtime';
import { catchUpLane } from './realtime/catch-up';
import { socketFeatures } from './realtime/features';
import { backgroundJobs } from './services/jobs';
import { primeCaseLists } from './services/cases';
import { rehearsePreAlerts } from './services/rehearsal';
import { isEmpty, seedDemo } from './services/seed';

export interface RunningServer {
  url: string;
  port: number;
  db: Knex;
  io: RealtimeServer;
  mailer: Mailer;
  logger: Logger;
  http: HttpServer;
  deps: AppDeps;
  close(): Promise<void>;
}

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
}

/** Starts the whole product in this process: database, identity provider, mail, HTTP and sockets. */
export async function startServer(config: Config, opts: StartOptions = {}): Promise<RunningServer> {
  const logger = opts.logger ?? pino({ level: config.logLevel, base: undefined });
  const clock = opts.clock ?? systemClock;
  const db = opts.db ?? createDb(config.databaseFile);
  const applied = await migrate(db);
  if (applied.length) logger.info({ applied }, 'database migrated');
  if (config.seedDemo && (await isEmpty(db))) {
    await seedDemo(db, clock);
    logger.info('demo data loaded');
  }
  // Off the event loop: a checkpoint's fsyncs no longer land inside a pre-alert's commit.
  const checkpoints = opts.db ? null : await startCheckpoints(db, config.databaseFile, logger);
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

  const http = createServer();
  await new Promise<void>((resolve, reject) => {
    http.once('error', reject);
    http.listen(config.port, config.host, () => resolve());
  });
  const port = (http.address() as AddressInfo).port;
  const publicUrl = config.publicUrl ?? `http://localhost:${port}`;
  const issuer = config.oidc.issuer ?? `${publicUrl}/idp`;

  const mailer = opts.mailer ?? (await createMailer({ smtpUrl: config.smtpUrl, from: config.mailFrom, db, logger, clock }));
  const sessionMiddleware = createSessionMiddleware({ db, secret: config.sessionSecret, secure: publicUrl.startsWith('https://') });
  const catchUp = catchUpLane();
  const io = createRealtime({ httpServer: http, sessionMiddleware, db, logger, publicOrigin: new URL(publicUrl).origin, catchUp });
  const deps: AppDeps = { config, db, logger, clock, mailer, publicUrl, sessionMiddleware, io, catchUp, limiterStore: opts.limiterStore };
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
        client: { id: config.oidc.clientId, secret: config.oidc.clientSecret, redirectUri: `${publicUrl}/auth/callback`, postLogoutRedirectUri: `${publicUrl}/signed-out` },
      });
  if (idp && publicUrl.startsWith('https://')) idp.provider.proxy = true;

  let vite: ViteDevServer | undefined;
  if (opts.dev) {
    const { createServer: createVite } = await import('vite');
    vite = await createVite({ server: { middlewareMode: true, hmr: { server: http } }, appType: 'spa' });
  }

  const app = createApp({ ...deps, issuer, idpRouter: idp?.router, vite });
  http.on('request', app);
  const jobs = opts.backgroundJobs === false ? { stop() {} } : backgroundJobs(deps);

  let closed = false;
  return {
    url: publicUrl,
    port,
    db,
    io,
    mailer,
    logger,
    http,
    deps,
    async close() {
      if (closed) return;
      closed = true;
      jobs.stop();
      await new Promise<void>((resolve) => io.close(() => resolve()));
      http.closeAllConnections?.();
      await vite?.close();
      await mailer.close();
      await checkpoints?.stop();
      if (!opts.db) await db.destroy();
    },
  };
}
