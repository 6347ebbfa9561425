import { execFile } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { promisify } from 'node:util';
import { afterAll, describe, expect, it } from 'vitest';
import { createDb, migrate } from '../../server/db';
import { BUILT_SERVER, serverBuildIsStale } from '../../server/cli/server-build.mjs';

const run = promisify(execFile);
const dirs: string[] = [];
afterAll(() => dirs.forEach((dir) => rmSync(dir, { recursive: true, force: true })));

describe('the compiled server', () => {
  it('is built before the tests and is fresh', () => {
    expect(existsSync(BUILT_SERVER)).toBe(true);
    expect(serverBuildIsStale()).toBe(false);
    // Plain JavaScript: nothing of TypeScript's syntax left in what `npm start` runs.
    expect(readFileSync(BUILT_SERVER, 'utf8')).not.toMatch(/import type |: Promise<number>/);
  });

  it('leaves no esbuild helper process behind once a build is done', async () => {
    // `plumbline start` builds when stale and then serves for days: esbuild's helper (a process of
    // its own, about 270 MB resident) must not stay beside it. A build in a process of its own,
    // which then lists its child processes by name from /proc.
    const script = `
      import { readdirSync, readFileSync } from 'node:fs';
      const { buildServer } = await import(${JSON.stringify(new URL('../../server/cli/server-build.mjs', import.meta.url).href)});
      await buildServer({ quiet: true });
      const children = () => readdirSync('/proc').filter((d) => /^\\d+$/.test(d)).flatMap((pid) => {
        try {
          const stat = readFileSync('/proc/' + pid + '/stat', 'utf8').trim();
          const [, name, rest] = /^\\d+ \\((.*)\\) (.*)$/.exec(stat);
          const [state, parent] = rest.split(' ');
          // A child that has exited but is not yet reaped (Z) holds no memory.
          return parent === String(process.pid) && state !== 'Z' ? [name] : [];
        } catch { return []; }
      });
      // Told to stop, the helper may take a moment to exit on a busy machine; left running, it stays for good.
      let left = children();
      for (let i = 0; i < 50 && left.includes('esbuild'); i++) {
        await new Promise((r) => setTimeout(r, 100));
        left = children();
      }
      console.log(JSON.stringify(left));
      process.exit(0);`;
    const { stdout } = await run(process.execPath, ['--input-type=module', '-e', script]);
    expect(JSON.parse(stdout.trim())).not.toContain('esbuild');
    expect(serverBuildIsStale()).toBe(false);
  });

  it('knows the migrations a database got from the sources, by the same names', async () => {
    const dataDir = mkdtempSync(join(tmpdir(), 'plumbline-build-'));
    dirs.push(dataDir);
    const db = createDb(join(dataDir, 'plumbline.sqlite'));
    const applied = await migrate(db);
    await db.destroy();
    expect(applied.length).toBeGreaterThan(10);
    // The built command finds nothing to do, where other names would make it run every migration again.
    const { stdout } = await run(process.execPath, ['server/cli/bin.mjs', 'migrate'], { env: { ...process.env, DATA_DIR: dataDir, NODE_ENV: 'test', AUDIT_KEY: '' } });
    expect(stdout.trim()).toBe('The database is up to date.');
  });

  it('refuses to start on an identity key file it did not write, in one line naming the file and the field, and leaves the file alone', async () => {
    const dataDir = mkdtempSync(join(tmpdir(), 'plumbline-build-'));
    dirs.push(dataDir);
    const keyFile = join(dataDir, 'idp-signing-key.json');
    const tampered = JSON.stringify({ keys: [{ kty: 'RSA', alg: 'none' }] });
    writeFileSync(keyFile, tampered);
    const failed = await run(process.execPath, ['server/cli/bin.mjs', 'start'], {
      env: { ...process.env, DATA_DIR: dataDir, NODE_ENV: 'test', PORT: '0', HOST: '127.0.0.1', LOG_LEVEL: 'silent', OIDC_ISSUER: '', AUDIT_KEY: '' },
    }).then(
      () => null,
      (error: { code: number; stderr: string }) => error,
    );
    expect(failed?.code).toBe(1);
    // Only the line for the operator: no stack trace through the bundled build (the identity
    // provider's own line about the Node.js version aside).
    expect(failed?.stderr.trim().split('\n').filter((line) => !line.startsWith('oidc-provider WARNING'))).toEqual([`Plumbline could not start: ${keyFile} is not a key file this server wrote (keys[0].n: Invalid input: expected string, received undefined). Move it aside to have a new key made; every session then signs in again.`]);
    expect(readFileSync(keyFile, 'utf8')).toBe(tampered);
  });

  it('runs the batch commands from the build', async () => {
    // SOURCES.md §2.6 (2021 guideline, moderate risk): a fall of more than 10 ft (3.048 m); 4 m is 13.1 ft.
    const child = execFile(process.execPath, ['server/cli/bin.mjs', 'evaluate'], { env: { ...process.env, NODE_ENV: 'test' } });
    const out = new Promise<string>((resolve, reject) => {
      let text = '';
      child.stdout!.on('data', (chunk) => (text += chunk));
      child.on('exit', (code) => (code === 0 ? resolve(text) : reject(new Error(`exit ${code}`))));
    });
    child.stdin!.end(`${JSON.stringify({ fall: { heightM: 4 }, ageYears: 40 })}\n`);
    const result = JSON.parse((await out).trim().split('\n')[0]);
    expect(result.fieldRisk).toBe('moderate');
    expect(result.criteria.map((c: { id: string }) => c.id)).toEqual(['field-2021:fall-above-10-ft']);
  });
});
