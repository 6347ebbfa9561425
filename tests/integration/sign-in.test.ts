import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startTestServer, type TestServer } from '../support/server';
import { browserlessClient, signIn } from '../support/sign-in';
import { demoAccounts } from '../../server/services/demo/seed';

let server: TestServer;
beforeAll(async () => {
  server = await startTestServer();
});
afterAll(() => server?.close());

describe('the built-in identity provider', () => {
  it('publishes a discovery document that requires PKCE with S256', async () => {
    const res = await fetch(`${server.url}/idp/.well-known/openid-configuration`);
    expect(res.status).toBe(200);
    const doc = await res.json();
    expect(doc.issuer).toBe(`${server.url}/idp`);
    expect(doc.code_challenge_methods_supported).toEqual(['S256']);
    expect(doc.end_session_endpoint).toBe(`${server.url}/idp/session/end`);
  });

  it('shows our own sign-in page with labelled Email and Password fields', async () => {
    const client = browserlessClient(server.url);
    const res = await client.fetch(`${server.url}/auth/login`);
    const html = await res.text();
    expect(res.url).toMatch(new RegExp(`^${server.url}/idp/interaction/`));
    expect(html).toContain('<label for="email">Email</label>');
    expect(html).toContain('<label for="password">Password</label>');
    expect(html).toContain('>Sign in</button>');
    expect(html).not.toMatch(/https?:\/\/(?!localhost|127\.0\.0\.1)/);
  });

  it('refuses a wrong password and keeps the person on the sign-in page', async () => {
    await expect(signIn(server.url, 'nurse@plumbline.test', 'not-the-password')).rejects.toThrow(/HTTP 401/);
  });

  it('sends the authorization request with PKCE S256, state and nonce', async () => {
    const res = await fetch(`${server.url}/auth/login`, { redirect: 'manual' });
    expect(res.status).toBe(302);
    const url = new URL(res.headers.get('location')!);
    expect(url.pathname).toBe('/idp/auth');
    expect(url.searchParams.get('code_challenge_method')).toBe('S256');
    expect(url.searchParams.get('code_challenge')).toMatch(/^[A-Za-z0-9_-]{43}$/);
    // openid-client's random state and nonce: 32 random bytes, base64url without padding.
    expect(url.searchParams.get('state')).toMatch(/^[A-Za-z0-9_-]{43}$/);
    expect(url.searchParams.get('nonce')).toMatch(/^[A-Za-z0-9_-]{43}$/);
    const again = new URL((await fetch(`${server.url}/auth/login`, { redirect: 'manual' })).headers.get('location')!);
    expect(again.searchParams.get('state')).not.toBe(url.searchParams.get('state'));
  });
});

describe('signing in through the whole redirect flow', () => {
  it.each(demoAccounts)('$email signs in and /api/me gives their roles and memberships', async (account) => {
    const client = await signIn(server.url, account.email);
    const me = await (await client.get('/api/me')).json();
    expect(me.user.email).toBe(account.email);
    expect(me.roles).toEqual(account.roles);
    expect(me.memberships.length).toBeGreaterThan(0);
  });

  it('gives a new session id at sign-in (no session fixation) with httpOnly, SameSite=Lax cookies', async () => {
    const client = browserlessClient(server.url);
    await client.fetch(`${server.url}/auth/login`);
    const before = (await client.jar.getCookies(server.url)).find((c) => c.key === 'plumbline.sid');
    expect(before).toBeDefined();
    const signedIn = await signIn(server.url, 'nurse@plumbline.test');
    const after = (await signedIn.jar.getCookies(server.url)).find((c) => c.key === 'plumbline.sid');
    expect(after?.httpOnly).toBe(true);
    expect(after?.sameSite).toBe('lax');
    // The pre-sign-in id from another jar is not signed in.
    client.jar.setCookieSync(`plumbline.sid=${before!.value}`, server.url);
    expect((await client.get('/api/me')).status).toBe(401);
  });

  it('signs out at both ends: the app session and the provider session', async () => {
    const client = await signIn(server.url, 'lead@plumbline.test');
    const out = await client.fetch(`${server.url}/auth/logout`, { method: 'POST', headers: { origin: server.url } });
    // The provider's confirmation page; in a browser its same-origin script presses the button.
    const confirm = await out.text();
    expect(new URL(out.url).pathname).toBe("/idp/session/end");
    const action = /<form[^>]*action="([^"]+)"/.exec(confirm)![1];
    const xsrf = /name="xsrf" value="([^"]+)"/.exec(confirm)![1];
    const done = await client.fetch(new URL(action, server.url), {
      method: 'POST',
      headers: { 'content-type': 'application/x-www-form-urlencoded', origin: server.url },
      body: new URLSearchParams({ xsrf, logout: 'yes' }),
    });
    expect(done.url).toBe(`${server.url}/signed-out`);
    expect((await client.get('/api/me')).status).toBe(401);
    // The provider forgot the person too: a new sign-in asks for the password again.
    const again = await client.fetch(`${server.url}/auth/login`);
    expect(await again.text()).toContain('<label for="password">Password</label>');
  });

  it('refuses a sign-out posted from another site', async () => {
    const client = await signIn(server.url, 'lead@plumbline.test');
    const res = await client.fetch(`${server.url}/auth/logout`, { method: 'POST', headers: { origin: 'http://evil.example', accept: 'application/json' } });
    expect(res.status).toBe(403);
    expect((await res.json()).error.code).toBe('cross_site');
    expect((await client.get('/api/me')).status).toBe(200);
  });
});
