// The server as `plumbline start` runs it (background jobs on, the same stop on SIGTERM/SIGINT),
// without building the client first: for tests that stop a real process and time its exit.
import { loadConfig } from '../../server/config';
import { startServer, stopOnSignals } from '../../server/server';

const server = await startServer(loadConfig(process.env));
stopOnSignals(server);
process.stdout.write(`listening at ${server.url}\n`);
