// The OpenAPI document lists every /api route the server answers and is valid OpenAPI 3.1; the
// reference page serves its viewer from this server only.
import { Validator } from '@seriousme/openapi-schema-validator';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startTestServer, type TestServer } from '../support/server';
import { signIn } from '../support/sign-in';

interface Layer { route?: { path: string | string[]; methods: Record<string, boolean> }; handle?: { stack?: Layer[] } }

/** Every METHOD /path the Express app routes under /api, walked from its router as mounted. */
function routesOf(stack: Layer[]): string[] {
  const found: string[] = [];
  for (const layer of stack) {
    if (layer.route) {
      for (const path of ([] as unknown[]).concat(layer.route.path)) {
        // The client's catch-all is a regular expression that excludes /api/.
        if (typeof path !== 'string' || !path.startsWith('/api/')) continue;
        for (const method of Object.keys(layer.route.methods)) if (method !== '_all') found.push(`${method.toUpperCase()} ${path.replace(/:([A-Za-z]+)/g, '{$1}')}`);
      }
    } else if (layer.handle?.stack) {
      found.push(...routesOf(layer.handle.stack));
    }
  }
  return found;
}

let server: TestServer;
let document: { openapi: string; paths: Record<string, Record<string, unknown>> };

beforeAll(async () => {
  server = await startTestServer();
  document = await (await fetch(new URL('/api/openapi.json', server.url))).json();
});
afterAll(() => server?.close());

describe('the OpenAPI document', () => {
  it('lists every /api route of the running app, and no route it does not have', () => {
    const app = server.http.listeners('request').find((listener) => 'router' in (listener as object)) as unknown as { router: { stack: Layer[] } };
    const routed = [...new Set(routesOf(app.router.stack))].sort();
    const documented = Object.entries(document.paths).flatMap(([path, ops]) => Object.keys(ops).map((method) => `${method.toUpperCase()} ${path}`)).sort();
    expect(routed.length).toBeGreaterThan(55);
    expect(documented).toEqual(routed);
  });

  it('passes an OpenAPI 3.1 validator', async () => {
    const validator = new Validator();
    const result = await validator.validate(document as never);
    expect(result.errors ?? []).toEqual([]);
    expect(result.valid).toBe(true);
    expect(validator.version).toBe('3.1');
  });

  it('describes requests from the shared schemas: the pre-alert body, a query and a path parameter', () => {
    const preAlerts = document.paths['/api/pre-alerts'].post as any;
    const native = preAlerts.requestBody.content['application/json'].schema.anyOf[0];
    expect(native.required).toEqual(expect.arrayContaining(['clientId', 'hospitalId', 'clinical']));
    expect(native.properties.clinical.properties.vitals).toBeDefined();
    expect(preAlerts.security).toEqual([{ machineClient: [] }]);
    const exportOp = document.paths['/api/quality/export.ndjson'].get as any;
    expect(exportOp.parameters.map((p: any) => `${p.in}:${p.name}`)).toEqual(['query:hospitalId', 'query:from', 'query:to', 'query:type']);
    const fhir = document.paths['/api/cases/{id}/fhir'].get as any;
    expect(fhir.parameters[0]).toMatchObject({ in: 'path', name: 'id', required: true });
  });
});

describe('the reference page', () => {
  it('is for administrators, with its viewer served from here', async () => {
    const nurse = await signIn(server.url, 'nurse@plumbline.test');
    expect((await nurse.get('/api/docs')).status).toBe(403);
    const admin = await signIn(server.url, 'admin@plumbline.test');
    const page = await admin.fetch(new URL('/api/docs', server.url));
    expect(page.status).toBe(200);
    const html = await page.text();
    const sources = [...html.matchAll(/(?:src|href)="([^"]+)"/g)].map((m) => m[1]);
    expect(sources.length).toBeGreaterThan(3);
    for (const source of sources) {
      expect(source.startsWith('/'), source).toBe(true);
      expect((await admin.fetch(new URL(source, server.url))).status, source).toBe(200);
    }
    expect(page.headers.get('content-security-policy')).toContain("script-src 'self'");
  });
});
