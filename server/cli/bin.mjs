#!/usr/bin/env -S node --max-semi-space-size=4 --no-parallel-scavenge
// The `plumbline` command. The server is TypeScript run through tsx, so there is no separate
// compile step for it; the client is built by Vite.
//
// --max-semi-space-size=4 (here, in npm start and in the benchmark's server): the server
// allocates little per request, and the default young generation costs about 40 MB of resident
// memory for nothing (measured with 1,000 sockets: 190 MB → 153 MB). It must be given at start.
//
// --no-parallel-scavenge (in the same places, and in npm run dev): the young generation is
// swept by the main thread alone. On a small machine with two cores, a helper thread that the
// system parks mid-sweep holds up the main thread, and with it every pre-alert waiting on it. In the load benchmark on
// two shared cores, scavenges over 3 ms fell from 109–171 per run to 62–102, and their total time
// from 1.0–1.5 s to 0.84–1.16 s, over the same ~350 scavenges.
import { register } from 'tsx/esm/api';

register();
const { main } = await import('./main.ts');
process.exitCode = await main(process.argv.slice(2));
