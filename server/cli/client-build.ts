import { existsSync, readdirSync, statSync } from 'node:fs';
import { join } from 'node:path';

/** The built client that the production server serves. */
export const BUILT_CLIENT = 'dist/client/index.html';

function newestMtime(path: string): number {
  if (!existsSync(path)) return 0;
  const stat = statSync(path);
  if (!stat.isDirectory()) return stat.mtimeMs;
  let newest = 0;
  for (const entry of readdirSync(path)) newest = Math.max(newest, newestMtime(join(path, entry)));
  return newest;
}

/**
 * Whether the client must be built before it is served: never built, or any of its sources
 * (the client, the shared code, the page, the build settings) changed since, as after a pull.
 */
export function clientBuildIsStale(root = '.'): boolean {
  const built = join(root, BUILT_CLIENT);
  if (!existsSync(built)) return true;
  const sources = ['src', 'shared', 'index.html', 'vite.config.ts'].map((p) => newestMtime(join(root, p)));
  return Math.max(...sources) > statSync(built).mtimeMs;
}
