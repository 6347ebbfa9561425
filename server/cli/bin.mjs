#!/usr/bin/env -S GLIBC_TUNABLES=glibc.malloc.mmap_threshold=131072 node --max-semi-space-size=4 --no-parallel-scavenge
// The `plumbline` command. It runs the server's build (dist/server, plain JavaScript made by
// esbuild), building it first when it is missing or older than the sources; `plumbline dev`
// runs the TypeScript sources through tsx instead, for hot reload.
//
// --max-semi-space-size=4 (here, in npm start and in the benchmark's server): the server
// allocates little per request, and the default young generation costs about 40 MB of resident
// memory for nothing (measured with 1,000 sockets: 190 MB → 153 MB). It must be given at start.
//
// GLIBC_TUNABLES=glibc.malloc.mmap_threshold=131072 (here, in npm start and in the benchmark's
// server): the C library hands every block of 128 KB or more straight back to the system when it
// is freed. By default it raises that threshold to the largest block freed so far, and then keeps
// such blocks in each thread's arena for reuse. A password check (scrypt) takes 16 MB for a
// moment on one of libuv's threads: four sign-ins at once left about 64 MB resident for good
// (measured: 4 sign-ins, 200 MB → 120 MB; 1,000 sockets, 225 MB → 145 MB). Read by the C
// library as the process starts, so it cannot be set from JavaScript; elsewhere than glibc it is
// ignored.
//
// --no-parallel-scavenge (in the same places, and in npm run dev): the young generation is
// swept by the main thread alone. On a small machine with two cores, a helper thread that the
// system parks mid-sweep holds up the main thread, and with it every pre-alert waiting on it. In the load benchmark on
// two shared cores, scavenges over 3 ms fell from 109–171 per run to 62–102, and their total time
// from 1.0–1.5 s to 0.84–1.16 s, over the same ~350 scavenges.
import { pathToFileURL } from 'node:url';
import { existsSync } from 'node:fs';
import { BUILT_SERVER, buildServer, serverBuildIsStale } from './server-build.mjs';

const argv = process.argv.slice(2);
let main;
if (argv[0] === 'dev') {
  const { register } = await import('tsx/esm/api');
  register();
  ({ main } = await import('./main.ts'));
} else {
  if (serverBuildIsStale()) {
    process.stderr.write(existsSync(BUILT_SERVER) ? 'Building the server (its sources changed since the last build)…\n' : 'Building the server (first start)…\n');
    await buildServer({ quiet: true });
  }
  ({ main } = await import(pathToFileURL(BUILT_SERVER).href));
}
const code = await main(argv);
// A command that failed may leave something open (a start that failed half way has its database
// and mail server open): it ends here rather than waiting on them.
if (code !== 0) process.exit(code);
