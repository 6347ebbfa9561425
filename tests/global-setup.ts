import { existsSync, statSync, readdirSync } from 'node:fs';
import { join } from 'node:path';

// The browser tests serve the built client; build it once per run when the sources are newer.
function newestMtime(dir: string): number {
  let newest = 0;
  for (const entry of readdirSync(dir, { withFileTypes: true })) {
    const path = join(dir, entry.name);
    newest = Math.max(newest, entry.isDirectory() ? newestMtime(path) : statSync(path).mtimeMs);
  }
  return newest;
}

export default async function setup(project: { config: { include?: string[] } } | undefined) {
  const wantsBrowser = process.argv.some((arg) => arg.includes('e2e')) || !process.argv.some((arg) => arg.startsWith('tests/'));
  if (!wantsBrowser || !existsSync('index.html') || !existsSync('src/main.ts')) return;
  const built = 'dist/client/index.html';
  const sourcesNewer = !existsSync(built) || Math.max(newestMtime('src'), newestMtime('shared'), statSync('index.html').mtimeMs) > statSync(built).mtimeMs;
  if (!sourcesNewer) return;
  const { build } = await import('vite');
  await build({ logLevel: 'warn' });
  void project;
}
