import { request } from 'node:http';
import { existsSync, readFileSync } from 'node:fs';
import { brotliDecompressSync, gunzipSync } from 'node:zlib';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { BUILD_MANIFEST, buildClient, clientBuildIsStale, type BuildManifest } from '../../server/cli/client-build';
import { startTestServer, type TestServer } from '../support/server';
import { signIn } from '../support/sign-in';

interface Raw { status: number; headers: Record<string, string | string[] | undefined>; body: Buffer }

/** A plain HTTP GET that leaves the body as it came: no client-side decompression. */
function rawGet(url: string, headers: Record<string, string>): Promise<Raw> {
  return new Promise((resolve, reject) => {
    request(url, { headers }, (res) => {
      const chunks: Buffer[] = [];
      res.on('data', (c: Buffer) => chunks.push(c));
      res.on('end', () => resolve({ status: res.statusCode ?? 0, headers: res.headers, body: Buffer.concat(chunks) }));
    }).on('error', reject).end();
  });
}

describe('the client and the API answers go compressed', () => {
  let server: TestServer;
  let entry: string;

  beforeAll(async () => {
    if (clientBuildIsStale() || !existsSync(BUILD_MANIFEST)) buildClient();
    const manifest = JSON.parse(readFileSync(BUILD_MANIFEST, 'utf8')) as BuildManifest;
    entry = `/${Object.values(manifest).find((c) => c.isEntry)!.file}`;
    server = await startTestServer();
  }, 180_000);
  afterAll(() => server?.close());

  it('sends the brotli copy made at build to a browser that takes it, with Content-Encoding and Vary', async () => {
    const plain = readFileSync(`dist/client${entry}`);
    const br = await rawGet(server.url + entry, { 'accept-encoding': 'gzip, deflate, br' });
    expect(br.status).toBe(200);
    expect(br.headers['content-encoding']).toBe('br');
    expect(br.headers.vary).toMatch(/Accept-Encoding/i);
    expect(br.headers['content-type']).toMatch(/javascript/);
    expect(br.headers['cache-control']).toContain('immutable');
    expect(br.body.length).toBeLessThan(plain.length / 2);
    expect(brotliDecompressSync(br.body).equals(plain)).toBe(true);
  });

  it('sends gzip to a browser without brotli, and the file as it is to one that takes neither', async () => {
    const plain = readFileSync(`dist/client${entry}`);
    const gz = await rawGet(server.url + entry, { 'accept-encoding': 'gzip' });
    expect(gz.headers['content-encoding']).toBe('gzip');
    expect(gz.headers.vary).toMatch(/Accept-Encoding/i);
    expect(gunzipSync(gz.body).equals(plain)).toBe(true);
    const none = await rawGet(server.url + entry, { 'accept-encoding': 'identity' });
    expect(none.headers['content-encoding']).toBeUndefined();
    expect(none.body.equals(plain)).toBe(true);
  });

  it('serves the page of every screen compressed and never cached unchecked, so a new version is seen', async () => {
    const page = await rawGet(`${server.url}/pre-alert`, { 'accept-encoding': 'br' });
    expect(page.status).toBe(200);
    expect(page.headers['content-encoding']).toBe('br');
    expect(page.headers['cache-control']).toBe('no-cache');
    expect(page.headers['content-security-policy']).toContain("script-src 'self'");
    expect(brotliDecompressSync(page.body).toString()).toContain('<div id="app">');
    const worker = await rawGet(`${server.url}/sw.js`, {});
    expect(worker.status).toBe(200);
    expect(worker.headers['cache-control']).toBe('no-cache');
    const manifest = await rawGet(`${server.url}/manifest.webmanifest`, { 'accept-encoding': 'gzip' });
    expect(JSON.parse(gunzipSync(manifest.body).toString())).toMatchObject({ short_name: 'Plumbline', display: 'standalone', theme_color: '#1c2a3f' });
  });

  it('compresses JSON answers on the fly', async () => {
    const nurse = await signIn(server.url, 'nurse@plumbline.test');
    const cookie = await nurse.cookieHeader();
    const board = await rawGet(`${server.url}/api/board`, { cookie, accept: 'application/json', 'accept-encoding': 'gzip' });
    expect(board.status).toBe(200);
    expect(board.headers['content-encoding']).toBe('gzip');
    expect(board.headers.vary).toMatch(/Accept-Encoding/i);
    const json = JSON.parse(gunzipSync(board.body).toString()) as { cases: unknown[] };
    expect(Array.isArray(json.cases)).toBe(true);
  });

  it('leaves a missing asset a 404, not the page', async () => {
    const missing = await rawGet(`${server.url}/assets/nothing-here.js`, { 'accept-encoding': 'br' });
    expect(missing.status).toBe(404);
  });
});
