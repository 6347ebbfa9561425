import type { Server as HttpServer, IncomingMessage } from 'node:http';
import { Server, type ServerOptions } from 'socket.io';
import type { RequestHandler } from 'express';
import type { Knex } from 'knex';
import type { Logger } from 'pino';
import type { Me } from '../../shared/roles';
import type { ClientToServerEvents, ServerToClientEvents } from '../../shared/realtime/events';
import { loadMe } from '../auth/guards';
import { AppError, CaseRefusal } from '../errors';
import { crewView, readsAsCrew } from '../services/cases/crew';
import { RateLimited } from '../limits';
import type { CatchUpLane } from './catch-up';
import { refreshSocketsOf, sweepEndedSessions } from './session-follow';
import { roomsOf, type RealtimeServer, type RealtimeSocket, type SocketFeature } from './socket-types';

export { roomsOf, type InterServerEvents, type RealtimeServer, type RealtimeSocket, type SocketData, type SocketFeature } from './socket-types';

/**
 * Only allow-listed error details reach a client; anything else is logged and answered generically.
 * A refusal that carries the case gives it as this reader may see it (a crew: without the hospital's part).
 */
export function ackError(err: unknown, logger: Logger, me?: Me) {
  if (err instanceof AppError) {
    const wait = err instanceof RateLimited ? { retryAfterMs: err.retryAfterMs } : {};
    const current = err instanceof CaseRefusal && me ? { case: readsAsCrew(me, err.summary) ? crewView(err.summary) : err.summary } : {};
    return { ok: false as const, error: { code: err.code, message: err.message, ...wait, ...(err.issues?.[0] ? { field: err.issues[0].field, issues: err.issues } : {}), ...current } };
  }
  logger.error({ err }, 'socket handler failed');
  return { ok: false as const, error: { code: 'internal', message: 'Something went wrong on our side. It has been logged.' } };
}

export function createRealtime(opts: {
  httpServer: HttpServer;
  sessionMiddleware: RequestHandler;
  db: Knex;
  logger: Logger;
  publicOrigin: string;
  /** Sign-in checks of (re)connecting sockets wait here, so pre-alerts go first in a reconnect storm. */
  catchUp: CatchUpLane;
  /** Carries broadcasts and recovery state between a region's processes (server/redis.ts); this process alone without. */
  adapter?: ServerOptions['adapter'];
}): RealtimeServer {
  const io: RealtimeServer = new Server(opts.httpServer, {
    serveClient: false,
    ...(opts.adapter ? { adapter: opts.adapter } : {}),
    // A ping every 4 s, and a link that misses one for 4 s more is closed: both sides know within
    // 8 s that a crew's phone lost its signal (the defaults take up to 45 s).
    pingInterval: 4000,
    pingTimeout: 4000,
    // Recovery replays what a briefly disconnected client missed; the session is checked again.
    connectionStateRecovery: { maxDisconnectionDuration: 2 * 60_000, skipMiddlewares: false },
    allowRequest: (req, callback) => {
      const origin = req.headers.origin;
      // Browsers always send Origin; a page of another site must not ride on the session cookie.
      callback(null, origin === undefined || origin === opts.publicOrigin);
    },
  });
  io.engine.use(opts.catchUp.wrap(opts.sessionMiddleware));
  io.use(async (socket, next) => {
    const request = socket.request as IncomingMessage & { sessionID?: string; session?: { userId?: number; claimedRoles?: Me['roles'] } };
    try {
      const me = await opts.catchUp.run(() => loadMe(opts.db, request.session?.userId, request.session?.claimedRoles));
      if (!me) return next(new Error('unauthenticated'));
      socket.data.me = me;
      socket.data.sid = request.sessionID;
      socket.data.claimedRoles = request.session?.claimedRoles;
      next();
    } catch (err) {
      opts.logger.error({ err }, 'socket authentication failed');
      next(new Error('unauthenticated'));
    }
  });
  // Another process changed a person: their sockets here take the new roles and places too.
  if (opts.adapter) io.on('person:changed', (userId) => void refreshSocketsOf(io, opts.db, userId).catch((err: unknown) => opts.logger.error({ err, userId }, 'sockets could not follow a change of person')));
  const stopSweep = sweepEndedSessions(io, opts.db, opts.logger);
  opts.httpServer.once('close', stopSweep);
  io.on('connection', (socket) => {
    const rooms = roomsOf(socket.data.me);
    socket.join(rooms);
    socket.emit('session:ready', { userId: socket.data.me.user.id, rooms });
    socket.on('session:rooms', (ack) => {
      if (typeof ack !== 'function') return;
      ack({ ok: true, data: { rooms: [...socket.rooms].filter((room) => room !== socket.id) } });
    });
  });
  return io;
}

/** Features register after the dependencies exist; each sees every authenticated connection. */
export function attachSocketFeatures(io: RealtimeServer, features: SocketFeature[]): void {
  io.on('connection', (socket) => {
    for (const feature of features) feature(io, socket);
  });
}
