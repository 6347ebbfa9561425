import type { Server as HttpServer, IncomingMessage } from 'node:http';
import { Server, type ServerOptions, type Socket } from 'socket.io';
import type { RequestHandler } from 'express';
import type { Knex } from 'knex';
import type { Logger } from 'pino';
import type { Me } from '../../shared/roles';
import { roomOfAgency, roomOfHospital, roomOfUser, type ClientToServerEvents, type ServerToClientEvents } from '../../shared/realtime/events';
import { loadMe } from '../auth/guards';
import { AppError } from '../errors';
import { RateLimited } from '../limits';
import type { CatchUpLane } from './catch-up';
import { refreshSocketsOf, sweepEndedSessions } from './session-follow';

export interface SocketData {
  me: Me;
  /** The session the socket was opened with: it ends with it (session-follow.ts). */
  sid?: string;
  /** Roles an outside issuer claimed at sign-in, kept so a re-read of the person keeps them. */
  claimedRoles?: Me['roles'];
}
/** Between the processes of a region (through the Redis adapter): a person's roles or places changed. */
export interface InterServerEvents { 'person:changed': (userId: number) => void }
export type RealtimeServer = Server<ClientToServerEvents, ServerToClientEvents, InterServerEvents, SocketData>;
export type RealtimeSocket = Socket<ClientToServerEvents, ServerToClientEvents, InterServerEvents, SocketData>;

/** A feature adds its socket events through one of these, given each authenticated connection. */
export type SocketFeature = (io: RealtimeServer, socket: RealtimeSocket) => void;

export function roomsOf(me: Me): string[] {
  return [roomOfUser(me.user.id), ...me.memberships.map((m) => (m.kind === 'hospital' ? roomOfHospital(m.id) : roomOfAgency(m.id)))];
}

/** Only allow-listed error details reach a client; anything else is logged and answered generically. */
export function ackError(err: unknown, logger: Logger) {
  if (err instanceof AppError) {
    const wait = err instanceof RateLimited ? { retryAfterMs: err.retryAfterMs } : {};
    return { ok: false as const, error: { code: err.code, message: err.message, ...wait, ...(err.issues?.[0] ? { field: err.issues[0].field, issues: err.issues } : {}) } };
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
