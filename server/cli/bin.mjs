#!/usr/bin/env node
// The `plumbline` command. The server is TypeScript run through tsx, so there is no separate
// compile step for it; the client is built by Vite.
import { register } from 'tsx/esm/api';

register();
const { main } = await import('./main.ts');
process.exitCode = await main(process.argv.slice(2));
