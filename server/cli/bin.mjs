#!/usr/bin/env -S node --max-semi-space-size=4
// The `plumbline` command. The server is TypeScript run through tsx, so there is no separate
// compile step for it; the client is built by Vite.
//
// --max-semi-space-size=4 (here, in npm start and in the benchmark's server): the server
// allocates little per request, and the default young generation costs about 40 MB of resident
// memory for nothing (measured with 1,000 sockets: 190 MB → 153 MB). It must be given at start.
import { register } from 'tsx/esm/api';

register();
const { main } = await import('./main.ts');
process.exitCode = await main(process.argv.slice(2));
