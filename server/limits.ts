import { RateLimiterMemory, RateLimiterRedis, RateLimiterRes, type RateLimiterAbstract } from 'rate-limiter-flexible';
import { AppError } from './errors';

// Rate limits, counted by rate-limiter-flexible. Each limiter is made by a store factory: the
// memory store counts in this process; the Redis store (with REDIS_URL) counts across every
// server process of a region, so a flood spread over several processes meets one limit.

export interface LimiterSpec {
  /** Keeps the counts of one limiter apart from another's in a shared store. */
  keyPrefix: string;
  points: number;
  /** Seconds in the counting window. */
  duration: number;
  /** Seconds a key stays refused once over; 0 refuses only until the window ends. */
  blockDuration?: number;
}

export type LimiterStore = (spec: LimiterSpec) => RateLimiterAbstract;

export const memoryLimiterStore: LimiterStore = (spec) => new RateLimiterMemory(spec);

/**
 * Counts in Redis under `prefix`, shared by every process. While Redis is away a limiter answers
 * at once from this process's memory instead (the library's insurance limiter), so a pre-alert
 * is never held up or refused because the counter is unreachable.
 */
export function redisLimiterStore(client: unknown, prefix: string): LimiterStore {
  return (spec) =>
    new RateLimiterRedis({
      ...spec,
      keyPrefix: `${prefix}:limit:${spec.keyPrefix}`,
      storeClient: client,
      useRedisPackage: true,
      rejectIfRedisNotReady: true,
      insuranceLimiter: new RateLimiterMemory(spec),
    });
}

/** A refusal that waits out a limit: the sender may try again after `retryAfterMs`. */
export class RateLimited extends AppError {
  constructor(
    message: string,
    readonly retryAfterMs: number,
  ) {
    super(429, 'rate_limited', message);
  }
}

export const isLimiterAnswer = (value: unknown): value is RateLimiterRes => value instanceof RateLimiterRes;

/** "42 s", "3 min": how long a refusal lasts, as a person reads it. */
export function waitText(ms: number): string {
  const seconds = Math.max(1, Math.ceil(ms / 1000));
  return seconds < 120 ? `${seconds} s` : `${Math.ceil(seconds / 60)} min`;
}

export interface CrewCommandLimits {
  /** Pre-alerts and updates one account may send in a minute. */
  perAccountPerMinute: number;
  /** Pre-alerts and updates one unit (ambulance) may send in a minute, whoever signs in on it. */
  perUnitPerMinute: number;
}

/**
 * No ambulance sends more than a few pre-alerts and updates a minute [common practice, no source]:
 * one patient is one pre-alert and a handful of updates on the way in. Thirty a minute leaves room
 * for a crew that sends and corrects in a hurry, and stops a stuck or hostile device long before it
 * crowds the boards.
 */
export const DEFAULT_CREW_COMMAND_LIMITS: CrewCommandLimits = { perAccountPerMinute: 30, perUnitPerMinute: 30 };

/** Counts a crew's pre-alerts and updates per account and per unit; over either, the command is refused. */
export function crewCommandLimiter(store: LimiterStore, limits: CrewCommandLimits) {
  const perAccount = store({ keyPrefix: 'crew-account', points: limits.perAccountPerMinute, duration: 60 });
  const perUnit = store({ keyPrefix: 'crew-unit', points: limits.perUnitPerMinute, duration: 60 });
  return {
    async consume(userId: number, unitId: number | null | undefined): Promise<void> {
      try {
        await perAccount.consume(String(userId));
      } catch (err) {
        if (!isLimiterAnswer(err)) throw err;
        throw new RateLimited(
          `Too many pre-alerts and updates from your account (at most ${limits.perAccountPerMinute} a minute). It is kept on this device and sent again in ${waitText(err.msBeforeNext)}.`,
          err.msBeforeNext,
        );
      }
      if (unitId == null) return;
      try {
        await perUnit.consume(String(unitId));
      } catch (err) {
        if (!isLimiterAnswer(err)) throw err;
        throw new RateLimited(
          `Too many pre-alerts and updates from this unit (at most ${limits.perUnitPerMinute} a minute). It is kept on this device and sent again in ${waitText(err.msBeforeNext)}.`,
          err.msBeforeNext,
        );
      }
    },
  };
}
