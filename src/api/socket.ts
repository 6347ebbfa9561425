// The one socket.io connection of this tab. socket.io's own reconnection and connection-state
// recovery do the work of coming back; this module only shares the socket and its state.
//
// The state it reports must be honest within seconds, not the half-minute a dead TCP link can
// take to fail: the server pings every few seconds (server/realtime/index.ts), the browser's
// offline event drops the link at once, and a command left unanswered closes the transport so
// socket.io notices and reconnects, recovering what it missed.
import { io, type Socket } from 'socket.io-client';
import { readonly, ref } from 'vue';
import type { AckResponse, ClientToServerEvents, CommandAnswer, CommandName, CommandPayload, ServerToClientEvents } from '@shared/realtime/events';
import type { CaseSummary } from '@shared/schemas/cases';

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
  /** current: with a refusal because the case changed first or has ended, the case as it now stands. */
  constructor(readonly code: string, message: string, readonly field?: string, readonly issues: { field: string; message: string }[] = [], readonly retryAfterMs?: number, readonly current?: CaseSummary) {
    super(message);
    this.name = 'SocketCommandError';
  }
}

type TimedSocket = ReturnType<PlumblineSocket['timeout']>;
type Answered<E extends CommandName> = (err: Error | null, response: AckResponse<CommandAnswer<E>>) => void;

// socket.io types an event's payload and acknowledgement only when it is named by its literal:
// one line per command here lets sendCommand stay generic. A command added to the map in
// shared/realtime/events.ts without its line here does not compile.
const emitters: { [E in CommandName]: (socket: TimedSocket, payload: CommandPayload<E>, answered: Answered<E>) => void } = {
  'case:submit': (socket, payload, answered) => socket.emit('case:submit', payload, answered),
  'case:update': (socket, payload, answered) => socket.emit('case:update', payload, answered),
  'case:cancel': (socket, payload, answered) => socket.emit('case:cancel', payload, answered),
  'case:redirect': (socket, payload, answered) => socket.emit('case:redirect', payload, answered),
};

/** Sends a command and resolves with its data, or rejects with the server's error (or a timeout). */
export async function sendCommand<E extends CommandName>(event: E, payload: CommandPayload<E>, timeoutMs = 8000): Promise<CommandAnswer<E>> {
  const s = getSocket();
  let answer: AckResponse<CommandAnswer<E>>;
  try {
    answer = await new Promise((resolve, reject) => emitters[event](s.timeout(timeoutMs), payload, (err, response) => (err ? reject(err) : resolve(response))));
  } catch {
    // No acknowledgement: the link is not what it says, so stop saying it.
    connected.value = false;
    dropTransport();
    throw new SocketCommandError('timeout', 'No answer from the server in time.');
  }
  if (!answer.ok) throw new SocketCommandError(answer.error.code, answer.error.message, answer.error.field, answer.error.issues, answer.error.retryAfterMs, answer.error.case);
  return answer.data;
}

export function disconnectSocket(): void {
  socket?.disconnect();
  socket = null;
  connected.value = false;
}
