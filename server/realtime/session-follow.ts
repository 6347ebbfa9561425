import type { Knex } from 'knex';
import type { Logger } from 'pino';
import { findMe } from '../services/people/users';
import { roomsOf, type RealtimeServer, type RealtimeSocket } from './socket-types';

// A socket follows the session it was opened with. Its person is read at connection, and read
// again whenever an administrator changes their roles, places or password: the socket then leaves
// the rooms that are no longer theirs and joins the new ones, or is disconnected when they can no
// longer sign in. A sweep each second disconnects every socket whose session has ended (signed out
// elsewhere, expired, ended by an administrator), so no socket outlives its session by more than
// about a second.

/** How often the open sockets' sessions are checked against the session store. */
export const SESSION_SWEEP_MS = 1000;
/** Session ids per query: well below SQLite's limit on bound values. */
const SIDS_PER_QUERY = 500;

function socketsOf(io: RealtimeServer, userId: number): RealtimeSocket[] {
  return [...io.of('/').sockets.values()].filter((socket) => socket.data.me?.user.id === userId);
}

/** Reads the person again for each of their open sockets and moves the sockets to the rooms they now belong in. */
export async function refreshSocketsOf(io: RealtimeServer, db: Knex, userId: number): Promise<void> {
  for (const socket of socketsOf(io, userId)) {
    const me = await findMe(db, userId, socket.data.claimedRoles);
    if (!me) {
      socket.disconnect(true);
      continue;
    }
    socket.data.me = me;
    const wanted = new Set(roomsOf(me));
    for (const room of socket.rooms) if (room !== socket.id && !wanted.has(room)) socket.leave(room);
    socket.join([...wanted]);
  }
}

/** Disconnects every open socket of a person (their sessions have just been ended). */
export function disconnectSocketsOf(io: RealtimeServer, userId: number): void {
  for (const socket of socketsOf(io, userId)) socket.disconnect(true);
}

/** Disconnects the sockets opened with one session, as it signs out. */
export function disconnectSession(io: RealtimeServer, sid: string | undefined): void {
  if (!sid) return;
  for (const socket of io.of('/').sockets.values()) if (socket.data.sid === sid) socket.disconnect(true);
}

/** Sessions among these that are still live in the store. */
async function liveSessions(db: Knex, sids: string[], now: Date): Promise<Set<string>> {
  const live = new Set<string>();
  const stillValid = db.client.config.client === 'pg' ? 'CAST(? AS timestamptz) < expired' : 'datetime(?) < datetime(expired)';
  for (let i = 0; i < sids.length; i += SIDS_PER_QUERY) {
    const rows: string[] = await db('sessions').whereIn('sid', sids.slice(i, i + SIDS_PER_QUERY)).andWhereRaw(stillValid, [now.toISOString()]).pluck('sid');
    for (const sid of rows) live.add(sid);
  }
  return live;
}

/** Starts the sweep; it stops with the returned function. */
export function sweepEndedSessions(io: RealtimeServer, db: Knex, logger: Logger, everyMs = SESSION_SWEEP_MS): () => void {
  let running = false;
  const timer = setInterval(() => {
    if (running) return;
    const sockets = [...io.of('/').sockets.values()].filter((socket) => socket.data.sid);
    if (!sockets.length) return;
    running = true;
    const sids = [...new Set(sockets.map((socket) => socket.data.sid!))];
    liveSessions(db, sids, new Date())
      .then((live) => {
        for (const socket of sockets) if (!live.has(socket.data.sid!)) socket.disconnect(true);
      })
      .catch((err: unknown) => logger.warn({ err }, 'the open sockets’ sessions could not be checked'))
      .finally(() => {
        running = false;
      });
  }, everyMs);
  timer.unref();
  return () => clearInterval(timer);
}
