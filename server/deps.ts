import type { RequestHandler } from 'express';
import type { Knex } from 'knex';
import type { Logger } from 'pino';
import type { Config } from './config';
import type { Mailer } from './mail';
import type { SmsSender } from './sms';
import type { RealtimeServer } from './realtime';
import type { CatchUpLane } from './realtime/catch-up';
import type { LimiterStore } from './limits';
import type { RegionRedis } from './redis';

export interface Clock { now(): number }
export const systemClock: Clock = { now: () => Date.now() };

/** Everything a router, socket feature or background job needs; tests build their own. */
export interface AppDeps {
  config: Config;
  db: Knex;
  logger: Logger;
  clock: Clock;
  mailer: Mailer;
  /** SMS through the provider's SDK (or its local fake). */
  sms: SmsSender;
  /** The origin people reach, without a trailing slash. */
  publicUrl: string;
  sessionMiddleware: RequestHandler;
  /** socket.io, for broadcasting to hospital and agency rooms after a change commits. */
  io: RealtimeServer;
  /** Where reconnecting clients' catch-up work waits, behind pre-alerts (realtime/catch-up.ts). */
  catchUp: CatchUpLane;
  /** Where rate limits count; the memory store unless a shared one is given (server/limits.ts). */
  limiterStore?: LimiterStore;
  /** Redis shared by the region's processes, when REDIS_URL is set (server/redis.ts). */
  redis?: RegionRedis;
}
