import { mkdirSync, mkdtempSync, rmSync, utimesSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { clientBuildIsStale } from '../../../../server/cli/client-build';

// `npm start` builds the client when it has never been built or when its sources changed since,
// as after a `git pull`; otherwise it starts at once.
describe('whether npm start builds the client first', () => {
  let root = '';
  afterEach(() => rmSync(root, { recursive: true, force: true }));

  const file = (path: string, at: number) => {
    mkdirSync(join(root, path, '..'), { recursive: true });
    writeFileSync(join(root, path), 'x');
    utimesSync(join(root, path), at / 1000, at / 1000);
  };

  it('builds when there is no build, not when the build is newer than every source, and again after a source changes', () => {
    root = mkdtempSync(join(tmpdir(), 'plumbline-build-'));
    const t = Date.parse('2026-12-01T10:00:00Z');
    file('index.html', t);
    file('src/views/BoardView.vue', t);
    file('shared/triage/evaluate.ts', t);
    expect(clientBuildIsStale(root)).toBe(true);

    file('dist/client/index.html', t + 60_000);
    expect(clientBuildIsStale(root)).toBe(false);

    // A pulled change to the shared engine, deep in a folder, counts as much as one to the page.
    file('shared/triage/evaluate.ts', t + 120_000);
    expect(clientBuildIsStale(root)).toBe(true);
    file('dist/client/index.html', t + 180_000);
    expect(clientBuildIsStale(root)).toBe(false);
    file('vite.config.ts', t + 240_000);
    expect(clientBuildIsStale(root)).toBe(true);
  });
});
