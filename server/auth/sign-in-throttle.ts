import type { RateLimiterAbstract } from 'rate-limiter-flexible';
import { memoryLimiterStore, type LimiterStore } from '../limits';

// Failed sign-ins are counted three ways; a successful one is never counted, and clears the count
// of its own account on its own address.
// - One account from one address: a few tries, then a wait that doubles at each lock-out. This is
//   the limit a person mistyping at a shared workstation meets, and it touches nobody else there.
// - One account from anywhere: a higher count, so a guesser who changes address is still stopped.
// - One address over every account: far higher still, against trying one password on many
//   accounts, yet out of reach of a department signing in after a shift change.
// The figures follow the usual guidance for online guessing (OWASP ASVS 2.2.1: anti-automation
// such as back-off and per-account limits) [common practice, no source for the exact counts].

export interface SignInThrottleLimits {
  /** Failures of one account from one address before the first wait. */
  perPair: number;
  /** Failures of one account from every address in an hour. */
  perAccount: number;
  /** Failures from one address over every account in an hour. */
  perAddress: number;
  /** The first wait for one account on one address; it doubles at each lock-out, up to an hour. */
  firstWaitSeconds: number;
}

export const DEFAULT_SIGN_IN_LIMITS: SignInThrottleLimits = { perPair: 5, perAccount: 20, perAddress: 100, firstWaitSeconds: 60 };

const HOUR = 3600;
const DAY = 24 * HOUR;

export interface SignInThrottle {
  /** How long this account must wait on this address before trying again; 0 when it may try now. */
  waitMs(email: string, address: string): Promise<number>;
  failed(email: string, address: string): Promise<void>;
  succeeded(email: string, address: string): Promise<void>;
}

async function refusedFor(limiter: RateLimiterAbstract, key: string): Promise<number> {
  const state = await limiter.get(key);
  return state && state.remainingPoints <= 0 ? state.msBeforeNext : 0;
}

export function signInThrottle(store: LimiterStore = memoryLimiterStore, limits: SignInThrottleLimits = DEFAULT_SIGN_IN_LIMITS): SignInThrottle {
  const byPair = store({ keyPrefix: 'sign-in-pair', points: limits.perPair, duration: 15 * 60 });
  const byAccount = store({ keyPrefix: 'sign-in-account', points: limits.perAccount, duration: HOUR });
  const byAddress = store({ keyPrefix: 'sign-in-address', points: limits.perAddress, duration: HOUR });
  // How often a key has been locked out today: each lock-out waits twice as long as the one before.
  const lockOuts = store({ keyPrefix: 'sign-in-lock-outs', points: 1_000_000, duration: DAY });

  const account = (email: string) => email.trim().toLowerCase();
  const pairOf = (email: string, address: string) => `${account(email)}|${address}`;

  async function countFailure(limiter: RateLimiterAbstract, key: string, firstWait: number): Promise<void> {
    const state = await limiter.penalty(key, 1);
    if (state.remainingPoints > 0) return;
    const times = (await lockOuts.penalty(`${limiter.keyPrefix}:${key}`, 1)).consumedPoints;
    await limiter.block(key, Math.min(HOUR, firstWait * 2 ** Math.min(10, times - 1)));
  }

  return {
    async waitMs(email, address) {
      const waits = await Promise.all([refusedFor(byPair, pairOf(email, address)), refusedFor(byAccount, account(email)), refusedFor(byAddress, address)]);
      return Math.max(...waits);
    },
    async failed(email, address) {
      await countFailure(byPair, pairOf(email, address), limits.firstWaitSeconds);
      await countFailure(byAccount, account(email), 15 * 60);
      await countFailure(byAddress, address, HOUR);
    },
    async succeeded(email, address) {
      await byPair.delete(pairOf(email, address));
    },
  };
}
