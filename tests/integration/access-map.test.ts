import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ACCESS, ACTIONS, rolesFor, SCOPE_WORDS, type Action } from '../../shared/access';
import { API_OPERATIONS } from '../../server/openapi';
import { startTestServer, type TestServer } from '../support/server';
import { signIn } from '../support/sign-in';

// The server's route guards and its OpenAPI document both read the access map: each routed
// operation's guard names the same action as the document, and the document's roles are the map's.

interface Handle { access?: Action }
interface Layer { route?: { path: string | string[]; methods: Record<string, boolean>; stack: { handle: Handle }[] }; handle?: { stack?: Layer[] } }

/** Every METHOD /path under /api with the action its guard checks (null when it has none). */
function guardsOf(stack: Layer[]): Map<string, Action | null> {
  const found = new Map<string, Action | null>();
  for (const layer of stack) {
    if (layer.route) {
      const guard = layer.route.stack.find((l) => typeof l.handle.access === 'string')?.handle.access ?? null;
      for (const path of ([] as unknown[]).concat(layer.route.path)) {
        if (typeof path !== 'string' || !path.startsWith('/api/')) continue;
        for (const method of Object.keys(layer.route.methods)) if (method !== '_all') found.set(`${method.toUpperCase()} ${path.replace(/:([A-Za-z]+)/g, '{$1}')}`, guard);
      }
    } else if (layer.handle?.stack) {
      for (const [key, guard] of guardsOf(layer.handle.stack)) found.set(key, guard);
    }
  }
  return found;
}

let server: TestServer;
let document: { paths: Record<string, Record<string, { description: string }>> };

beforeAll(async () => {
  server = await startTestServer();
  document = await (await fetch(new URL('/api/openapi.json', server.url))).json();
});
afterAll(() => server?.close());

describe('the access map, read by the server', () => {
  it('guards each route with the action its OpenAPI operation names', () => {
    const app = server.http.listeners('request').find((listener) => 'router' in (listener as object)) as unknown as { router: { stack: Layer[] } };
    const guards = guardsOf(app.router.stack);
    expect(guards.size).toBeGreaterThan(55);
    for (const op of API_OPERATIONS) {
      const key = `${op.method.toUpperCase()} ${op.path}`;
      expect(guards.has(key), key).toBe(true);
      expect(guards.get(key), key).toBe(op.access === null || op.access === 'signed-in' ? null : op.access);
    }
  });

  it("writes each operation's roles and scope into the document as the map has them", () => {
    let checked = 0;
    for (const op of API_OPERATIONS) {
      if (op.access === null || op.access === 'signed-in') continue;
      const { description } = document.paths[op.path][op.method];
      expect(description, `${op.method} ${op.path}`).toBe(`Roles: ${rolesFor(op.access).join(', ')}. Scope: ${SCOPE_WORDS[ACCESS[op.access].scope]}.`);
      checked++;
    }
    expect(checked).toBeGreaterThan(55);
  });

  it('names every action of the map in the API', () => {
    const used = new Set(API_OPERATIONS.map((op) => op.access));
    expect(ACTIONS.filter((action) => !used.has(action))).toEqual([]);
  });

  it('refuses a role the map leaves out with the words the map gives', async () => {
    const nurse = await signIn(server.url, 'nurse@plumbline.test');
    const res = await nurse.get('/api/quality/targets?hospitalId=1');
    expect(res.status).toBe(403);
    expect((await res.json()).error.message).toBe(`This needs one of these roles: ${rolesFor('quality.read').join(', ')}.`);
  });
});
