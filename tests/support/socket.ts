import { io as connect, type Socket } from 'socket.io-client';
import type { ClientToServerEvents, ServerToClientEvents } from '../../shared/realtime/events';
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
export function command<T = unknown>(socket: TestSocket, event: string, payload: unknown): Promise<{ ok: true; data: T } | { ok: false; error: { code: string; message: string; field?: string } }> {
  return (socket as unknown as { timeout(ms: number): { emitWithAck(event: string, payload: unknown): Promise<never> } }).timeout(5000).emitWithAck(event, payload);
}

export function nextEvent<T extends unknown[]>(socket: TestSocket, event: keyof ServerToClientEvents, ms = 3000): Promise<T> {
  return new Promise((resolve, reject) => {
    const timer = setTimeout(() => reject(new Error(`no ${String(event)} within ${ms} ms`)), ms);
    (socket as unknown as { once(e: string, fn: (...args: unknown[]) => void): void }).once(event as string, (...args: unknown[]) => {
      clearTimeout(timer);
      resolve(args as T);
    });
  });
}
