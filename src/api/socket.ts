// The one socket.io connection of this tab. socket.io's own reconnection and connection-state
// recovery do the work of coming back; this module only shares the socket and its state.
import { io, type Socket } from 'socket.io-client';
import { readonly, ref } from 'vue';
import type { AckResponse, ClientToServerEvents, ServerToClientEvents } from '../../shared/realtime/events';

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
  return socket;
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
