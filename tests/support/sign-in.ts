import makeFetchCookie from 'fetch-cookie';
import { CookieJar } from 'tough-cookie';

export interface SignedInClient {
  fetch: typeof fetch;
  jar: CookieJar;
  /** The Cookie header a socket.io client sends to ride on this session. */
  cookieHeader(): Promise<string>;
  /** JSON helpers that send the Origin header a browser would. */
  get(path: string): Promise<Response>;
  send(method: string, path: string, body?: unknown): Promise<Response>;
}

export function browserlessClient(baseUrl: string): SignedInClient {
  const jar = new CookieJar();
  const fetchWithCookies = makeFetchCookie(fetch, jar) as unknown as typeof fetch;
  return {
    fetch: fetchWithCookies,
    jar,
    cookieHeader: () => jar.getCookieString(baseUrl),
    get: (path) => fetchWithCookies(new URL(path, baseUrl), { headers: { accept: 'application/json' } }),
    send: (method, path, body) =>
      fetchWithCookies(new URL(path, baseUrl), {
        method,
        headers: { accept: 'application/json', 'content-type': 'application/json', origin: new URL(baseUrl).origin },
        body: body === undefined ? undefined : JSON.stringify(body),
      }),
  };
}

/** Walks the whole OpenID Connect redirect flow over HTTP, as a browser would, and returns the signed-in client. */
export async function signIn(baseUrl: string, email: string, password = 'demo'): Promise<SignedInClient> {
  return signInWith(browserlessClient(baseUrl), baseUrl, email, password);
}

/** The same flow in a client that may already hold a cookie, as a browser that visited before would. */
export async function signInWith(client: SignedInClient, baseUrl: string, email: string, password = 'demo'): Promise<SignedInClient> {
  const loginPage = await client.fetch(new URL('/auth/login?returnTo=%2Fapi%2Fme', baseUrl));
  const html = await loginPage.text();
  const action = /<form method="post" action="([^"]+)"/.exec(html)?.[1];
  if (!loginPage.ok || !action) throw new Error(`no sign-in form (HTTP ${loginPage.status}): ${html.slice(0, 200)}`);
  const answer = await client.fetch(new URL(action.replace(/&amp;/g, '&'), baseUrl), {
    method: 'POST',
    headers: { 'content-type': 'application/x-www-form-urlencoded', origin: new URL(baseUrl).origin },
    body: new URLSearchParams({ email, password }),
  });
  if (!answer.ok) throw new Error(`sign-in refused (HTTP ${answer.status}) at ${answer.url}`);
  return client;
}
