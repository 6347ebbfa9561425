import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { DEFAULT_SIGN_IN_LIMITS } from '../../server/auth/sign-in-throttle';
import { startTestServer, type TestServer } from '../support/server';
import { browserlessClient, signIn } from '../support/sign-in';

// A shift change at shared workstations: every sign-in comes from one address. One person's
// wrong passwords hold back that person on that address, never the colleagues behind them, and a
// guesser is still stopped, with the right password refused too while the wait lasts.

let server: TestServer;
beforeAll(async () => {
  server = await startTestServer();
});
afterAll(() => server?.close());

/** One sign-in try through the real form: the status of the answer to the password post. */
async function attempt(email: string, password: string): Promise<{ status: number; html: string; retryAfter: string | null }> {
  const client = browserlessClient(server.url);
  const page = await client.fetch(new URL('/auth/login', server.url));
  const action = /<form method="post" action="([^"]+)"/.exec(await page.text())![1];
  const res = await client.fetch(new URL(action.replace(/&amp;/g, '&'), server.url), {
    method: 'POST',
    headers: { 'content-type': 'application/x-www-form-urlencoded', origin: server.url },
    body: new URLSearchParams({ email, password }),
    redirect: 'manual',
  });
  return { status: res.status, html: await res.text(), retryAfter: res.headers.get('retry-after') };
}

describe('sign-in throttling at a shared address', () => {
  it('25 wrong passwords for one person, then five others sign in from the same address', async () => {
    const statuses: number[] = [];
    for (let i = 0; i < 25; i++) statuses.push((await attempt('nurse@plumbline.test', `wrong-${i}`)).status);
    const allowed = DEFAULT_SIGN_IN_LIMITS.perPair;
    expect(statuses).toEqual([...Array(allowed).fill(401), ...Array(25 - allowed).fill(429)]);

    const blocked = await attempt('nurse@plumbline.test', 'demo');
    // Brute force is still stopped: the right password is not even tried while the wait lasts.
    expect(blocked.status).toBe(429);
    expect(blocked.html).toContain('Too many failed sign-ins for this account. Wait');
    expect(Number(blocked.retryAfter)).toBeGreaterThan(0);
    expect(Number(blocked.retryAfter)).toBeLessThanOrEqual(DEFAULT_SIGN_IN_LIMITS.firstWaitSeconds);

    for (const email of ['paramedic@plumbline.test', 'lead@plumbline.test', 'quality@plumbline.test', 'admin@plumbline.test', 'fenmoor.nurse@plumbline.test']) {
      const me = await (await (await signIn(server.url, email)).get('/api/me')).json();
      expect(me.user.email).toBe(email);
    }
  });

  it('never counts a successful sign-in', async () => {
    for (let i = 0; i < DEFAULT_SIGN_IN_LIMITS.perPair * 3; i++) await signIn(server.url, 'quality@plumbline.test');
    expect((await attempt('quality@plumbline.test', 'demo')).status).toBe(303);
  });

  it('a success clears the person’s count on that address, so a few slips a day never add up to a lock-out', async () => {
    for (let round = 0; round < 3; round++) {
      for (let i = 0; i < DEFAULT_SIGN_IN_LIMITS.perPair - 1; i++) expect((await attempt('lead@plumbline.test', 'typo')).status).toBe(401);
      expect((await attempt('lead@plumbline.test', 'demo')).status).toBe(303);
    }
  });

  it('counts an unknown address the same as a known one, so the answers tell a guesser nothing', async () => {
    const statuses: number[] = [];
    for (let i = 0; i < DEFAULT_SIGN_IN_LIMITS.perPair + 1; i++) statuses.push((await attempt('nobody@plumbline.test', 'guess')).status);
    expect(statuses).toEqual([...Array(DEFAULT_SIGN_IN_LIMITS.perPair).fill(401), 429]);
  });
});
