import { existsSync } from 'node:fs';
import type { Knex } from 'knex';
import pino from 'pino';
import { loadConfig } from '../config';
import { openDb } from '../db';
import { systemClock } from '../deps';
import { createMailer, type Mailer } from '../mail';
import { verifyAuditChain } from '../services/audit/audit';
import { checkCheckpoints, checkpointFileOf, readCheckpointFile, writeCheckpoint } from '../services/audit/checkpoints';
import type { CliIo } from './engine-commands';

// `plumbline audit verify [--checkpoints FILE]`: walks the keyed hash chain of the audit trail,
// and holds it against signed checkpoints. `plumbline audit checkpoint`: takes a checkpoint now.
// Exit codes: 0 the chain holds, 1 rows were changed, removed, inserted or cut off behind the
// application's back, 2 bad usage.

const USAGE =
  'usage: plumbline audit verify [--checkpoints FILE]   (checks the audit trail of the database in DATA_DIR)\n' +
  '       plumbline audit checkpoint                    (signs the newest row: appended to DATA_DIR/audit-checkpoints.jsonl and mailed to the trauma programme)\n';

export interface AuditCommandOptions { db?: Knex; mailer?: Mailer | null; dataDir?: string }

export async function auditCommand(args: string[], io: Pick<CliIo, 'stdout' | 'stderr'>, opts: AuditCommandOptions = {}): Promise<number> {
  const [sub, ...rest] = args;
  const verify = sub === 'verify' && (rest.length === 0 || (rest.length === 2 && rest[0] === '--checkpoints'));
  const checkpoint = sub === 'checkpoint' && rest.length === 0;
  if (!verify && !checkpoint) {
    io.stderr.write(USAGE);
    return 2;
  }
  const checkpointsFile = verify ? rest[1] : undefined;
  if (checkpointsFile !== undefined && !existsSync(checkpointsFile)) {
    io.stderr.write(`There is no checkpoint file at ${checkpointsFile}.\n`);
    return 2;
  }
  let db = opts.db;
  const config = opts.db ? null : loadConfig();
  if (!db) {
    if (!config!.databaseUrl && !existsSync(config!.databaseFile)) {
      io.stderr.write(`There is no database at ${config!.databaseFile}; set DATA_DIR to the folder that holds plumbline.sqlite.\n`);
      return 2;
    }
    db = openDb(config!);
  }
  try {
    if (!(await db.schema.hasTable('audit_log'))) {
      io.stderr.write('This database has no audit trail yet; run "plumbline migrate" first.\n');
      return 2;
    }
    if (checkpoint) return await takeCheckpoint(db, io, opts, config);
    const check = await verifyAuditChain(db);
    if (!check.ok) {
      io.stdout.write(`Audit trail BROKEN at row ${check.brokenAt}: ${check.reason}. ${Math.max(0, check.rows - 1)} row(s) before it hold.\n`);
      return 1;
    }
    const keyed = check.keyedFrom === null ? 'no keyed rows yet (plain SHA-256 only)' : check.keyedFrom === 1 ? 'keyed from the first row' : `rows before ${check.keyedFrom} plain SHA-256, keyed from row ${check.keyedFrom}`;
    io.stdout.write(`Audit trail OK: ${check.rows} row(s) checked, the hash chain holds (${keyed}).\n`);
    if (checkpointsFile === undefined) return 0;
    const { checked, problems } = await checkCheckpoints(db, readCheckpointFile(checkpointsFile));
    for (const p of problems) io.stdout.write(`Checkpoint on line ${p.line}: ${p.problem}.\n`);
    if (problems.length) {
      io.stdout.write(`Checkpoints FAIL: ${problems.length} of ${checked} checkpoint(s) do not match the database.\n`);
      return 1;
    }
    io.stdout.write(`Checkpoints OK: ${checked} checkpoint(s) match the database.\n`);
    return 0;
  } finally {
    if (!opts.db) await db.destroy();
  }
}

async function takeCheckpoint(db: Knex, io: Pick<CliIo, 'stdout' | 'stderr'>, opts: AuditCommandOptions, config: ReturnType<typeof loadConfig> | null): Promise<number> {
  const dataDir = opts.dataDir ?? config?.dataDir;
  if (!dataDir) throw new Error('audit checkpoint needs the data directory');
  const mailer = opts.mailer !== undefined ? opts.mailer : await createMailer({ smtpUrl: config!.smtpUrl, from: config!.mailFrom, db, logger: pino({ level: 'silent' }), clock: systemClock });
  try {
    const file = checkpointFileOf(dataDir);
    const { checkpoint, mailedTo } = await writeCheckpoint({ db, clock: systemClock, mailer, file });
    io.stdout.write(`Checkpoint of row ${checkpoint.headId} appended to ${file}${mailedTo.length ? ` and mailed to ${mailedTo.join(', ')}` : '; no trauma programme address is set, so nothing was mailed'}.\n`);
    return 0;
  } finally {
    if (opts.mailer === undefined) await mailer?.close();
  }
}
