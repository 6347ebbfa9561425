import { createAdapter } from '@socket.io/redis-streams-adapter';
import { createClient } from 'redis';
import type { Logger } from 'pino';
import { redisLimiterStore, type LimiterStore } from './limits';

// With REDIS_URL, the processes of one region share Redis for what must not live in one process:
// socket.io's broadcasts and its connection-state recovery (the Redis Streams adapter), and the
// rate limits' counters. Everything else they share lives in the database.

export interface RegionRedis {
  /** socket.io's adapter: a room broadcast on one process reaches the room's sockets on every process. */
  adapter: ReturnType<typeof createAdapter>;
  /** Rate-limit counters in Redis (server/limits.ts). */
  limiterStore: LimiterStore;
  /** Resolves when Redis answers PING within `withinMs`; rejects naming why not. */
  ping(withinMs?: number): Promise<void>;
  close(): Promise<void>;
}

/**
 * Connects to Redis and waits until it answers. Keys and channels start with `prefix`, so that
 * several regions (or test runs) can share one Redis without hearing each other.
 */
export async function connectRegionRedis(url: string, prefix: string, logger: Logger): Promise<RegionRedis> {
  // A lost link is tried again every 0.2 s at first, then every 2 s, for as long as it takes.
  // While Redis is away, a command fails at once instead of waiting in a queue: a rate limit then
  // counts in this process's memory, and a broadcast still reaches this process's own sockets
  // (the adapter sends it without a stream offset). The adapter's stream reader is a copy of this
  // client that does wait in the queue: failing at once, it would ask again in a tight loop.
  const client = createClient({ url, disableOfflineQueue: true, socket: { reconnectStrategy: (retries: number) => Math.min(200 * (retries + 1), 2000) } });
  const duplicate = client.duplicate.bind(client) as (overrides?: object) => unknown;
  (client as { duplicate: unknown }).duplicate = (overrides?: object) => duplicate({ ...overrides, disableOfflineQueue: false });
  let down = false;
  client.on('error', (err: Error) => {
    if (!down) logger.error({ err: err.message }, 'Redis is unreachable; trying again');
    down = true;
  });
  client.on('ready', () => {
    if (down) logger.info('Redis answers again');
    down = false;
  });
  await client.connect();
  const adapter = createAdapter(client, {
    streamName: `${prefix}:socket.io`,
    channelPrefix: `${prefix}:socket.io`,
    sessionKeyPrefix: `${prefix}:socket.io-session:`,
    // How long the stream reader waits for news before asking again; also how long its
    // connection may outlive a stop [ours].
    blockTimeInMs: 2000,
  });
  return {
    adapter,
    limiterStore: redisLimiterStore(client, prefix),
    async ping(withinMs = 1000) {
      if (!client.isReady) throw new Error('not connected');
      let timer: NodeJS.Timeout | undefined;
      const late = new Promise<never>((_, reject) => (timer = setTimeout(() => reject(new Error(`no answer to PING within ${withinMs} ms`)), withinMs)));
      try {
        await Promise.race([client.ping(), late]);
      } finally {
        clearTimeout(timer);
      }
    },
    async close() {
      if (client.isOpen) await client.quit().catch(() => client.destroy());
    },
  };
}
