import { existsSync } from 'node:fs';
import type { Knex } from 'knex';
import { loadConfig } from '../config';
import { createDb } from '../db';
import { verifyAuditChain } from '../services/audit';
import type { CliIo } from './engine-commands';

// `plumbline audit verify`: walks the hash chain of the audit trail. Exit codes: 0 the chain
// holds, 1 a row was changed, removed or inserted behind the application's back, 2 bad usage.

const USAGE = 'usage: plumbline audit verify   (checks the audit trail of the database in DATA_DIR)\n';

export async function auditCommand(args: string[], io: Pick<CliIo, 'stdout' | 'stderr'>, opts: { db?: Knex } = {}): Promise<number> {
  if (args[0] !== 'verify' || args.length > 1) {
    io.stderr.write(USAGE);
    return 2;
  }
  let db = opts.db;
  if (!db) {
    const { databaseFile } = loadConfig();
    if (!existsSync(databaseFile)) {
      io.stderr.write(`There is no database at ${databaseFile}; set DATA_DIR to the folder that holds plumbline.sqlite.\n`);
      return 2;
    }
    db = createDb(databaseFile);
  }
  try {
    if (!(await db.schema.hasTable('audit_log'))) {
      io.stderr.write('This database has no audit trail yet; run "plumbline migrate" first.\n');
      return 2;
    }
    const check = await verifyAuditChain(db);
    if (check.ok) {
      io.stdout.write(`Audit trail OK: ${check.rows} row(s) checked, the hash chain holds.\n`);
      return 0;
    }
    io.stdout.write(`Audit trail BROKEN at row ${check.brokenAt}: ${check.reason}. ${check.rows - 1} row(s) before it hold.\n`);
    return 1;
  } finally {
    if (!opts.db) await db.destroy();
  }
}
