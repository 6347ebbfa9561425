import { describe, expect, it } from 'vitest';
import { signInThrottle } from '../../../server/auth/sign-in-throttle';

// The waits of the sign-in throttle, on the memory store, with a one-second first wait so the
// doubling shows within a test.

const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

describe('the sign-in throttle', () => {
  it('locks one account on one address after its failures, and the next lock-out waits twice as long', async () => {
    const throttle = signInThrottle(undefined, { perPair: 3, perAccount: 100, perAddress: 100, firstWaitSeconds: 1 });
    for (let i = 0; i < 3; i++) {
      expect(await throttle.waitMs('ana@example.test', '10.0.0.5')).toBe(0);
      await throttle.failed('ana@example.test', '10.0.0.5');
    }
    const first = await throttle.waitMs('ana@example.test', '10.0.0.5');
    expect(first).toBeGreaterThan(500);
    expect(first).toBeLessThanOrEqual(1000);
    // Another person on the same address, and the same person elsewhere, are not held back.
    expect(await throttle.waitMs('ben@example.test', '10.0.0.5')).toBe(0);
    expect(await throttle.waitMs('ana@example.test', '10.0.0.9')).toBe(0);
    // The account is counted however its address is written.
    expect(await throttle.waitMs(' ANA@example.test ', '10.0.0.5')).toBeGreaterThan(0);

    await sleep(first + 50);
    expect(await throttle.waitMs('ana@example.test', '10.0.0.5')).toBe(0);
    for (let i = 0; i < 3; i++) await throttle.failed('ana@example.test', '10.0.0.5');
    const second = await throttle.waitMs('ana@example.test', '10.0.0.5');
    expect(second).toBeGreaterThan(1500);
    expect(second).toBeLessThanOrEqual(2000);
  });

  it('stops a guesser who moves from address to address by the account’s own count', async () => {
    const throttle = signInThrottle(undefined, { perPair: 3, perAccount: 6, perAddress: 100, firstWaitSeconds: 1 });
    for (let i = 0; i < 6; i++) await throttle.failed('cat@example.test', `10.0.1.${i}`);
    expect(await throttle.waitMs('cat@example.test', '10.0.1.200')).toBeGreaterThan(0);
  });

  it('stops one address trying one password on many accounts by the address’s count', async () => {
    const throttle = signInThrottle(undefined, { perPair: 3, perAccount: 6, perAddress: 10, firstWaitSeconds: 1 });
    for (let i = 0; i < 10; i++) await throttle.failed(`user${i}@example.test`, '10.0.2.1');
    expect(await throttle.waitMs('someone.else@example.test', '10.0.2.1')).toBeGreaterThan(0);
    expect(await throttle.waitMs('someone.else@example.test', '10.0.2.2')).toBe(0);
  });

  it('clears the count of one account on one address at a success', async () => {
    const throttle = signInThrottle(undefined, { perPair: 3, perAccount: 100, perAddress: 100, firstWaitSeconds: 1 });
    await throttle.failed('dee@example.test', '10.0.3.1');
    await throttle.failed('dee@example.test', '10.0.3.1');
    await throttle.succeeded('dee@example.test', '10.0.3.1');
    await throttle.failed('dee@example.test', '10.0.3.1');
    await throttle.failed('dee@example.test', '10.0.3.1');
    expect(await throttle.waitMs('dee@example.test', '10.0.3.1')).toBe(0);
  });
});
