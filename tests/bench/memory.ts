// The server's resident memory with many screens connected: a region's tablets and wall boards
// riding on a few sessions, each one a real authenticated socket.io connection.
import { io as connect, type Socket } from 'socket.io-client';
import { signIn } from '../support/sign-in';
import { childServer, residentMb, tempDataDir } from './support/child-server';
import { prepareRegion } from './support/fixtures';
import { round1 } from './support/traffic';

export interface MemoryResult { sockets: number; rssMb: number; idleRssMb: number }

export async function measureMemory(opts: { sockets: number; log(line: string): void }): Promise<MemoryResult> {
  // A day-to-day start: the database exists already (the first start's demo seeding is a one-off).
  const dataDir = tempDataDir();
  await prepareRegion(dataDir, { hospitals: 1, paramedics: 1 });
  const server = await childServer({ dataDir });
  const sockets: Socket[] = [];
  try {
    await server.start();
    const sessions = await Promise.all(['paramedic@plumbline.test', 'nurse@plumbline.test', 'lead@plumbline.test', 'admin@plumbline.test'].map((email) => signIn(server.url, email)));
    const cookies = await Promise.all(sessions.map((s) => s.cookieHeader()));
    const idleRssMb = residentMb(server.pid!);
    for (let i = 0; i < opts.sockets; i += 50) {
      const batch = Array.from({ length: Math.min(50, opts.sockets - i) }, (_, k) => {
        const socket = connect(server.url, { transports: ['websocket'], forceNew: true, reconnection: false, extraHeaders: { cookie: cookies[(i + k) % cookies.length] } });
        sockets.push(socket);
        return new Promise<void>((resolve, reject) => {
          socket.once('connect', () => resolve());
          socket.once('connect_error', reject);
        });
      });
      await Promise.all(batch);
    }
    // Let the handshakes' garbage go before reading what stays.
    await new Promise((r) => setTimeout(r, 3000));
    const connected = sockets.filter((s) => s.connected).length;
    const rssMb = residentMb(server.pid!);
    opts.log(`memory: ${connected} sockets, ${rssMb.toFixed(1)} MB resident (idle ${idleRssMb.toFixed(1)} MB)`);
    return { sockets: connected, rssMb: round1(rssMb)!, idleRssMb: round1(idleRssMb)! };
  } finally {
    for (const socket of sockets) socket.close();
    await server.dispose();
  }
}
