// The server's build: its TypeScript (with the shared code it imports) bundled by esbuild into
// dist/server, and each migration compiled beside it, so `npm start` runs plain JavaScript and a
// start compiles nothing. Packages stay in node_modules (external), as npm installed them.
// Plain JavaScript, because `plumbline start` calls it before anything TypeScript can be loaded.
import { copyFileSync, existsSync, mkdirSync, readdirSync, renameSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';

const root = resolve(dirname(fileURLToPath(import.meta.url)), '../..');

/** What `npm start` runs. */
export const BUILT_SERVER = join(root, 'dist/server/main.js');
const STAMP = join(root, 'dist/server/built.json');
const SOURCES = ['server', 'shared', 'migrations', 'package.json'];

/** The newest modification time of a file, or of anything under a folder (0 when missing). */
export function newestMtime(path) {
  if (!existsSync(path)) return 0;
  const stat = statSync(path);
  if (!stat.isDirectory()) return stat.mtimeMs;
  let newest = 0;
  for (const entry of readdirSync(path)) newest = Math.max(newest, newestMtime(join(path, entry)));
  return newest;
}

/** Whether the build is missing, or older than any of the server's sources (as after a pull or an edit). */
export function serverBuildIsStale() {
  if (!existsSync(STAMP) || !existsSync(BUILT_SERVER)) return true;
  const builtAt = statSync(STAMP).mtimeMs;
  return SOURCES.some((p) => newestMtime(join(root, p)) > builtAt);
}

/**
 * Packages stay external, but Node's own loader wants a file's extension where a package has no
 * "exports" map (`dayjs/plugin/utc` is `dayjs/plugin/utc.js` to it), as tsx and Vite never do.
 */
const nodeSubpaths = {
  name: 'node-subpaths',
  setup(build) {
    build.onResolve({ filter: /^(@[^/]+\/)?[^./@][^/]*\/.+/ }, ({ path }) => {
      const file = join(root, 'node_modules', path);
      if (!existsSync(file) && existsSync(`${file}.js`)) return { path: `${path}.js`, external: true };
      return undefined;
    });
  },
};

/**
 * Builds into a folder of its own, then puts it in place with renames, so a process that starts
 * meanwhile finds either the old build whole or the new one whole.
 */
export async function buildServer({ quiet = false } = {}) {
  const { build } = await import('esbuild');
  const started = Date.now();
  const out = join(root, `dist/server-${process.pid}-${started}`);
  const common = { platform: 'node', format: 'esm', target: 'node20', packages: 'external', logLevel: quiet ? 'error' : 'warning', legalComments: 'none' };
  try {
    await build({
      ...common,
      entryPoints: { main: join(root, 'server/cli/main.ts') },
      bundle: true,
      splitting: true,
      outdir: out,
      chunkNames: '[name]-[hash]',
      sourcemap: 'linked',
      sourcesContent: false,
      tsconfig: join(root, 'server/tsconfig.json'),
      plugins: [nodeSubpaths],
    });
    const migrations = readdirSync(join(root, 'migrations')).filter((name) => /^\d{14}_.+\.ts$/.test(name));
    await build({ ...common, entryPoints: migrations.map((name) => join(root, 'migrations', name)), bundle: true, outdir: join(out, 'migrations'), plugins: [nodeSubpaths] });
    copyFileSync(join(root, 'server/checkpoint-worker.mjs'), join(out, 'checkpoint-worker.mjs'));
    writeFileSync(join(out, 'built.json'), `${JSON.stringify({ builtAt: new Date(started).toISOString(), ms: Date.now() - started })}\n`);
    mkdirSync(join(root, 'dist'), { recursive: true });
    const old = join(root, `dist/server-old-${process.pid}-${started}`);
    if (existsSync(join(root, 'dist/server'))) renameSync(join(root, 'dist/server'), old);
    renameSync(out, join(root, 'dist/server'));
    rmSync(old, { recursive: true, force: true });
  } catch (error) {
    rmSync(out, { recursive: true, force: true });
    // Another process may have put a build in place first; a fresh one is as good as ours.
    if (!serverBuildIsStale()) return;
    throw error;
  }
  if (!quiet) console.log(`Built the server into dist/server in ${Date.now() - started} ms.`);
}

if (process.argv[1] && resolve(process.argv[1]) === fileURLToPath(import.meta.url)) await buildServer();
