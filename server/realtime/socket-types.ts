import type { Server, Socket } from 'socket.io';
import type { Me } from '../../shared/roles';
import { roomOfAgency, roomOfHospital, roomOfUser, type ClientToServerEvents, type ServerToClientEvents } from '../../shared/realtime/events';

// The socket server's types and a person's rooms, apart from the server's set-up (index.ts) so
// that the features it starts can import them without importing it back.

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
