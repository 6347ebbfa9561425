// A TCP relay standing in for a region's load balancer: each connection goes to the next server
// in turn, and a server that refuses the connection is passed over for the next one. It knows
// nothing of HTTP or WebSocket, so it needs no sticky sessions: a socket.io client that only uses
// WebSocket holds one TCP connection for its whole life, and when that connection's server dies
// the client reconnects, which here means a new connection to a server that answers.
import { connect, createServer, type Server, type Socket } from 'node:net';

export interface Relay {
  readonly url: string;
  readonly port: number;
  /** Connections now open, per server port. */
  open(): Map<number, number>;
  /** Connections made so far, per server port. */
  made(): Map<number, number>;
  close(): Promise<void>;
}

export async function startRelay(backendPorts: number[], host = '127.0.0.1'): Promise<Relay> {
  let next = 0;
  const open = new Map<number, number>(backendPorts.map((p) => [p, 0]));
  const made = new Map<number, number>(backendPorts.map((p) => [p, 0]));
  const clients = new Set<Socket>();

  /** Connects to the next server that answers, trying each once. */
  const pickBackend = (tries = 0): Promise<{ socket: Socket; port: number } | null> => {
    if (tries >= backendPorts.length) return Promise.resolve(null);
    const port = backendPorts[next++ % backendPorts.length];
    return new Promise((resolve) => {
      const socket = connect({ host, port });
      socket.once('connect', () => {
        socket.removeAllListeners('error');
        resolve({ socket, port });
      });
      socket.once('error', () => {
        socket.destroy();
        resolve(pickBackend(tries + 1));
      });
    });
  };

  const server: Server = createServer((client) => {
    clients.add(client);
    client.pause();
    client.once('close', () => clients.delete(client));
    client.on('error', () => client.destroy());
    void pickBackend().then((picked) => {
      if (!picked || client.destroyed) {
        picked?.socket.destroy();
        client.destroy();
        return;
      }
      const { socket: upstream, port } = picked;
      open.set(port, open.get(port)! + 1);
      made.set(port, made.get(port)! + 1);
      upstream.setNoDelay(true);
      client.setNoDelay(true);
      upstream.on('error', () => upstream.destroy());
      // Either side gone: the other goes too, as a balancer's connection does when its server dies.
      upstream.once('close', () => {
        open.set(port, open.get(port)! - 1);
        client.destroy();
      });
      client.once('close', () => upstream.destroy());
      client.pipe(upstream);
      upstream.pipe(client);
      client.resume();
    });
  });
  await new Promise<void>((resolve, reject) => {
    server.once('error', reject);
    server.listen(0, host, () => resolve());
  });
  const port = (server.address() as { port: number }).port;
  return {
    url: `http://${host}:${port}`,
    port,
    open: () => new Map(open),
    made: () => new Map(made),
    close: () =>
      new Promise<void>((resolve) => {
        for (const client of clients) client.destroy();
        server.close(() => resolve());
      }),
  };
}
