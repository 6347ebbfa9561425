import { io as connect, type Socket } from 'socket.io-client';
import type { AckResponse, ClientToServerEvents, ServerToClientEvents } from '../../shared/realtime/events';
import type { SignedInClient } from './sign-in';

export type TestSocket = Socket<ServerToClientEvents, ClientToServerEvents>;

/** A real socket.io connection riding on a signed-in session's cookie, as the browser's does. */
export async function connectAs(baseUrl: string, client: SignedInClient | null): Promise<TestSocket> {
  const socket: TestSocket = connect(baseUrl, {
    transports: ['websocket'],
    reconnection: false,
    forceNew: true,
    extraHeaders: client ? { cookie: await client.cookieHeader() } : {},
  });
  await new Promise<void>((resolve, reject) => {
    socket.once('connect', () => resolve());
    socket.once('connect_error', (err) => reject(err));
  });
  return socket;
}

/** Emits a command and waits for its acknowledgement. */
export function command<T = unknown>(socket: TestSocket, event: string, payload: unknown): Promise<AckResponse<T>> {
  return (socket as unknown as { timeout(ms: number): { emitWithAck(event: string, payload: unknown): Promise<never> } }).timeout(5000).emitWithAck(event, payload);
}

/** The next such event, or with `matching` the next one it accepts (an earlier change's copy may still be on its way). */
export function nextEvent<T extends unknown[]>(socket: TestSocket, event: keyof ServerToClientEvents, ms = 3000, matching?: (...args: T) => boolean): Promise<T> {
  const target = socket as unknown as { on(e: string, fn: (...args: unknown[]) => void): void; off(e: string, fn: (...args: unknown[]) => void): void };
  return new Promise((resolve, reject) => {
    const heard = (...args: unknown[]) => {
      if (matching && !matching(...(args as T))) return;
      clearTimeout(timer);
      target.off(event as string, heard);
      resolve(args as T);
    };
    const timer = setTimeout(() => {
      target.off(event as string, heard);
      reject(new Error(`no ${String(event)}${matching ? ' that matched' : ''} within ${ms} ms`));
    }, ms);
    target.on(event as string, heard);
  });
}
