// The server's build: its TypeScript (with the shared code it imports) bundled by esbuild into
// dist/server, and each migration compiled beside it, so `npm start` runs plain JavaScript and a
// start compiles nothing.
//
// The packages every start loads are bundled in too, without comments or indentation. A running
// server keeps the source text of every module it has loaded, for as long as it runs: loaded
// from node_modules as npm installed them, that was about 7.5 MB of the idle server's heap.
// Bundled alone, the idle server stayed at 111.6 MB resident; bundled this way, 105.9 MB
// (tests/bench/README.md, "Start and idle memory"). Names are kept (`keepNames`): the local identity provider looks its token
// lifetimes up by class name. Left in node_modules (EXTERNAL): native modules, the drivers and
// clients loaded only when a feature is configured (PostgreSQL, Redis, the SMS SDK, the build's
// own tools), and pino, whose transports run files by path in threads of their own.
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
const EXTERNAL = [
  // Native code.
  'better-sqlite3', 'bufferutil', 'utf-8-validate',
  // Knex's other database drivers: required by name when that database is chosen.
  'pg', 'pg-native', 'pg-query-stream', 'mysql', 'mysql2', 'mariadb', 'mariadb/*', 'oracledb', 'sqlite3', 'tedious', 'mssql',
  // Loaded only when a region, SMS or the client build is configured or asked for.
  'redis', '@socket.io/redis-streams-adapter', 'twilio', 'vite', 'esbuild', 'tsx',
  // Transports run by file path in worker threads.
  'pino', 'pino-pretty', 'thread-stream', 'supports-color',
];

/** CommonJS packages bundled into an ES module still call `require` for Node's own modules. */
const requireShim = "import { createRequire as __plumblineRequire } from 'node:module'; const require = __plumblineRequire(import.meta.url);";

export async function buildServer({ quiet = false } = {}) {
  const { build, stop } = await import('esbuild');
  const started = Date.now();
  const out = join(root, `dist/server-${process.pid}-${started}`);
  const common = { platform: 'node', format: 'esm', target: 'node20', logLevel: quiet ? 'error' : 'warning', legalComments: 'none' };
  try {
    await build({
      ...common,
      entryPoints: { main: join(root, 'server/cli/main.ts') },
      bundle: true,
      external: EXTERNAL,
      minifyWhitespace: true,
      minifySyntax: true,
      keepNames: true,
      banner: { js: requireShim },
      splitting: true,
      outdir: out,
      chunkNames: '[name]-[hash]',
      sourcemap: 'linked',
      sourcesContent: false,
      tsconfig: join(root, 'server/tsconfig.json'),
    });
    // Migrations run once each, so their packages stay in node_modules rather than in a copy per file.
    const migrations = readdirSync(join(root, 'migrations')).filter((name) => /^\d{14}_.+\.ts$/.test(name));
    await build({ ...common, packages: 'external', entryPoints: migrations.map((name) => join(root, 'migrations', name)), bundle: true, outdir: join(out, 'migrations'), plugins: [nodeSubpaths] });
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
  } finally {
    // esbuild builds in a helper process that it keeps for further builds; `plumbline start`
    // builds once and then serves, so the helper (about 270 MB resident) goes now.
    await stop();
  }
  if (!quiet) console.log(`Built the server into dist/server in ${Date.now() - started} ms.`);
}

if (process.argv[1] && resolve(process.argv[1]) === fileURLToPath(import.meta.url)) await buildServer();
