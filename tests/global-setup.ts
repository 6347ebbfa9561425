import type { TestProject } from 'vitest/node';
import { buildClient, clientBuildIsStale } from '../server/cli/client-build';
import { buildServer, serverBuildIsStale } from '../server/cli/server-build.mjs';

// Once per test project, before its files run.
export default async function setup(project: TestProject) {
  // Tests that start the product as a process run its build (dist/server); make it once here,
  // before several of them would find it stale at the same moment.
  if (serverBuildIsStale()) await buildServer({ quiet: true });
  // The browser tests serve the built client.
  if (project.name === 'e2e' && clientBuildIsStale()) buildClient();
}
