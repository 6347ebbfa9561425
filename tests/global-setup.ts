import { existsSync } from 'node:fs';
import { buildClient, clientBuildIsStale } from '../server/cli/client-build';
import { buildServer, serverBuildIsStale } from '../server/cli/server-build.mjs';

// The browser tests serve the built client; build it once per run when the sources are newer.
export default async function setup(project: { config: { include?: string[] } } | undefined) {
  // Tests that start the product as a process run its build (dist/server); make it once here,
  // before several of them would find it stale at the same moment.
  if (serverBuildIsStale()) await buildServer({ quiet: true });
  const wantsBrowser = process.argv.some((arg) => arg.includes('e2e')) || !process.argv.some((arg) => arg.startsWith('tests/'));
  if (!wantsBrowser || !existsSync('index.html') || !existsSync('src/main.ts')) return;
  if (!clientBuildIsStale()) return;
  buildClient();
  void project;
}
