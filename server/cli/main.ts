import { existsSync } from 'node:fs';
import { loadConfig } from '../config';
import { migrate, openDb } from '../db';
import { systemClock } from '../deps';
import { DEMO_PASSWORD, demoAccounts, isEmpty, seedDemo } from '../services/demo/seed';
import type { RunningServer } from '../server';
import { BUILT_CLIENT, buildClient, clientBuildIsStale } from './client-build';

const usage = `Usage: plumbline <command>

  start                 run the server (builds the client first when it is missing)
  dev                   run the server with the client served by Vite, with hot reload
  migrate               bring the database up to the latest migration
  seed                  load the invented demo scenario into an empty database
  evaluate [--set field-2021|field-2011] [--policy ID] [--csv] [--out jsonl|csv]
                        clinical inputs on stdin (JSON Lines, or CSV with --csv), one result each
                        on stdout; evaluate --help lists the fields and ids
  schema                the clinical input's JSON Schema
  cribari [--delimiter ,|;|tab]
                        CSV (activation,iss[,nfti]) on stdin, the matrix and rates as JSON
  iss                   {"injuries":[{"region","ais"}]} on stdin, {"iss","niss"} on stdout
  audit verify [--checkpoints FILE]
                        check the audit trail's keyed hash chain, and against signed
                        checkpoints; names the first broken row or checkpoint (exit 1)
  audit checkpoint      sign the chain's newest row: appended to DATA_DIR/audit-checkpoints.jsonl
                        and mailed to the trauma programme
  backup FILE           an online copy of the database (SQLite's backup API) while the server runs
  restore FILE          put a backup back in place; refuses while a server has the database open
`;

const io = { stdin: process.stdin, stdout: process.stdout, stderr: process.stderr };

export async function main(argv: string[]): Promise<number> {
  const [command, ...args] = argv;
  switch (command) {
    case 'start':
    case 'dev':
      return serve(command === 'dev');
    case 'migrate': {
      const db = openDb(loadConfig());
      const applied = await migrate(db);
      console.log(applied.length ? `Applied ${applied.length} migration(s): ${applied.join(', ')}` : 'The database is up to date.');
      await db.destroy();
      return 0;
    }
    case 'seed': {
      const db = openDb(loadConfig());
      await migrate(db);
      if (!(await isEmpty(db))) {
        console.error('The database already has people in it; the demo scenario loads only into an empty one.');
        await db.destroy();
        return 1;
      }
      await seedDemo(db, systemClock);
      console.log('Loaded the demo scenario.');
      await db.destroy();
      return 0;
    }
    case 'evaluate':
    case 'schema':
    case 'cribari':
    case 'iss': {
      const engine = await import('./engine-commands');
      const run = { evaluate: engine.evaluateCommand, schema: engine.schemaCommand, cribari: engine.cribariCommand, iss: engine.issCommand }[command];
      try {
        return await run(args, io);
      } catch (error) {
        // A batch user gets one line, never a stack trace.
        io.stderr.write(`plumbline ${command}: ${(error as Error)?.message ?? String(error)}\n`);
        return 1;
      }
    }
    case 'backup':
    case 'restore': {
      const { backupCommand, restoreCommand } = await import('./backup-command');
      return (command === 'backup' ? backupCommand : restoreCommand)(args, io);
    }
    case 'audit': {
      const { auditCommand } = await import('./audit-command');
      return auditCommand(args, io);
    }
    case undefined:
    case 'help':
    case '--help':
      console.log(usage);
      return command ? 0 : 1;
    default:
      console.error(`Unknown command "${command}".\n\n${usage}`);
      return 1;
  }
}

async function serve(dev: boolean): Promise<number> {
  const config = loadConfig(process.env, { dev });
  if (!dev && clientBuildIsStale()) {
    console.log(existsSync(BUILT_CLIENT) ? 'Building the client (its sources changed since the last build)…' : 'Building the client (first start)…');
    // As it ships (a NODE_ENV of "test" or "development" in the shell would otherwise give the
    // libraries' development builds), in a child process so the server does not keep the
    // bundler's memory for its whole life.
    try {
      buildClient();
    } catch (error) {
      console.error((error as Error).message);
      return 1;
    }
  }
  const { startServer } = await import('../server');
  let server: RunningServer;
  try {
    server = await startServer(config, { dev });
  } catch (error) {
    // What an operator can act on (a port in use, a damaged key file), without a stack trace
    // through the bundled build.
    console.error(`Plumbline could not start: ${error instanceof Error ? error.message : String(error)}`);
    return 1;
  }
  const local = !config.oidc.issuer;
  console.log(`\nPlumbline is running at ${server.url}${dev ? ' (development, hot reload)' : ''}`);
  console.log(`Data: ${config.dataDir}${server.mailer.local ? '  ·  mail: built-in SMTP fake (read it on the Messages sent page)' : ''}`);
  if (local) {
    console.log(`\nDemo sign-ins (password "${DEMO_PASSWORD}"):`);
    for (const account of demoAccounts) console.log(`  ${account.email.padEnd(30)} ${account.label}`);
  }
  console.log('');
  const { stopOnSignals } = await import('../server');
  stopOnSignals(server);
  return new Promise<number>(() => {});
}
