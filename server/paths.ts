import { existsSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

// Where the project's files are, the same whether the server runs from its TypeScript sources
// (tsx: `npm run dev`, the tests) or from its build in dist/server (`npm start`): found by walking
// up from this module's own file to the folder that holds package.json.
function findRoot(from: string): string {
  for (let dir = from; ; dir = dirname(dir)) {
    if (existsSync(join(dir, 'package.json')) && existsSync(join(dir, 'migrations'))) return dir;
    if (dirname(dir) === dir) throw new Error(`Plumbline's folder (with package.json and migrations/) is not above ${from}`);
  }
}

const here = fileURLToPath(import.meta.url);

/** The project's folder. */
export const projectRoot = findRoot(dirname(here));

/** True when this code runs from the build in dist/server (JavaScript), not from its sources. */
export const runningBuilt = here.endsWith('.js');

/** The migrations: the TypeScript files themselves from the sources, their compiled copies from the build. */
export const migrationsDir = runningBuilt ? join(projectRoot, 'dist/server/migrations') : join(projectRoot, 'migrations');
