// The one socket.io connection of this tab. socket.io's own reconnection and connection-state
// recovery do the work of coming back; this module only shares the socket and its state.
//
// The state it reports must be honest within seconds, not the half-minute a dead TCP link can
// take to fail: the server pings every few seconds (server/realtime/index.ts), the browser's
// offline event drops the link at once, and a command left unanswered closes the transport so
// socket.io notices and reconnects, recovering what it missed.
import { io, type Socket } from 'socket.io-client';
import { readonly, ref } from 'vue';
import type { AckResponse, ClientToServerEvents, ServerToClientEvents } from '@shared/realtime/events';

export type PlumblineSocket = Socket<ServerToClientEvents, ClientToServerEvents>;

const connected = ref(false);
/** True once the server refused the session (signed out elsewhere): reconnecting will not help. */
const refused = ref(false);
/** Counts every (re)connection that did not recover its state, so screens know to reload the truth. */
const freshConnections = ref(0);

let socket: PlumblineSocket | null = null;

export function getSocket(): PlumblineSocket {
  if (socket) return socket;
  socket = io({ withCredentials: true, transports: ['websocket', 'polling'], reconnectionDelayMax: 5000 });
  socket.on('connect', () => {
    connected.value = true;
    refused.value = false;
    if (!socket!.recovered) freshConnections.value++;
  });
  socket.on('disconnect', () => {
    connected.value = false;
  });
  socket.on('connect_error', (err) => {
    connected.value = false;
    if (err.message === 'unauthenticated') refused.value = true;
  });
  watchBrowserLink();
  return socket;
}

/** Drops a link the socket still believes in; socket.io then reconnects and recovers its state. */
function dropTransport(): void {
  socket?.io.engine?.close();
}

let watchingLink = false;
function watchBrowserLink(): void {
  if (watchingLink || typeof window === 'undefined') return;
  watchingLink = true;
  window.addEventListener('offline', () => {
    connected.value = false;
    dropTransport();
  });
  // Back online: try now rather than at the end of the reconnection back-off.
  window.addEventListener('online', () => {
    if (socket && !socket.connected) socket.connect();
  });
}

export const connection = { connected: readonly(connected), refused: readonly(refused), freshConnections: readonly(freshConnections) };

export class SocketCommandError extends Error {
  constructor(readonly code: string, message: string, readonly field?: string, readonly issues: { field: string; message: string }[] = [], readonly retryAfterMs?: number) {
    super(message);
    this.name = 'SocketCommandError';
  }
}

/** Sends a command and resolves with its data, or rejects with the server's error (or a timeout). */
export async function sendCommand<E extends keyof ClientToServerEvents, T>(event: E, payload: unknown, timeoutMs = 8000): Promise<T> {
  const s = getSocket();
  let answer: AckResponse<T>;
  try {
    answer = await (s.timeout(timeoutMs) as unknown as { emitWithAck(e: string, p: unknown): Promise<AckResponse<T>> }).emitWithAck(event as string, payload);
  } catch {
    // No acknowledgement: the link is not what it says, so stop saying it.
    connected.value = false;
    dropTransport();
    throw new SocketCommandError('timeout', 'No answer from the server in time.');
  }
  if (!answer.ok) throw new SocketCommandError(answer.error.code, answer.error.message, answer.error.field, answer.error.issues, answer.error.retryAfterMs);
  return answer.data;
}

export function disconnectSocket(): void {
  socket?.disconnect();
  socket = null;
  connected.value = false;
}
