import { copyFileSync, existsSync, renameSync, rmSync } from 'node:fs';
import { basename, dirname, join, resolve } from 'node:path';
import Database from 'better-sqlite3';
import { loadConfig } from '../config';
import type { CliIo } from './engine-commands';

// `plumbline backup FILE` copies the live database with SQLite's online backup API while the
// server keeps taking pre-alerts; `plumbline restore FILE` puts a backup back, and only while no
// server has the database open. Exit codes: 0 done, 1 refused or failed, 2 bad usage.

const BACKUP_USAGE = 'usage: plumbline backup FILE    (an online copy of the database in DATA_DIR; FILE must not exist)\n';
const RESTORE_USAGE = 'usage: plumbline restore FILE   (stop the server first; the current database is kept beside it)\n';

type Io = Pick<CliIo, 'stdout' | 'stderr'>;

/** On PostgreSQL (DATABASE_URL set) the copy is PostgreSQL's own business: answers the refusal, or null. */
function refusedOnPostgres(command: 'backup' | 'restore', io: Io, opts: { databaseFile?: string }): number | null {
  if (opts.databaseFile !== undefined || !loadConfig().databaseUrl) return null;
  const tool = command === 'backup' ? 'pg_dump (for example pg_dump --format=custom --file=FILE "$DATABASE_URL")' : 'pg_restore (for example pg_restore --clean --dbname="$DATABASE_URL" FILE)';
  io.stderr.write(`DATABASE_URL is set: the database is PostgreSQL, and plumbline ${command} copies only the SQLite file. Use ${tool}, or PostgreSQL's continuous archiving.\n`);
  return 2;
}

export interface BackupCheck { ok: boolean; problem?: string; cases: number; auditRows: number; migrations: number }

/** Opens a database file read-only and says whether it is whole and is one of ours. */
export function checkDatabaseFile(file: string): BackupCheck {
  try {
    return checkOpenable(file);
  } catch (err) {
    return { ok: false, problem: (err as Error).message, cases: 0, auditRows: 0, migrations: 0 };
  }
}

function checkOpenable(file: string): BackupCheck {
  const db = new Database(file, { readonly: true, fileMustExist: true });
  try {
    const integrity = db.pragma('integrity_check', { simple: true });
    if (integrity !== 'ok') return { ok: false, problem: `integrity check: ${String(integrity)}`, cases: 0, auditRows: 0, migrations: 0 };
    const tables = new Set((db.prepare("SELECT name FROM sqlite_master WHERE type = 'table'").all() as Array<{ name: string }>).map((t) => t.name));
    for (const table of ['knex_migrations', 'cases', 'audit_log']) {
      if (!tables.has(table)) return { ok: false, problem: `no ${table} table: not a Plumbline database`, cases: 0, auditRows: 0, migrations: 0 };
    }
    const count = (table: string) => Number((db.prepare(`SELECT COUNT(*) AS n FROM ${table}`).get() as { n: number }).n);
    return { ok: true, cases: count('cases'), auditRows: count('audit_log'), migrations: count('knex_migrations') };
  } finally {
    db.close();
  }
}

/**
 * Copies the database through SQLite's backup API in one step, so the copy is one consistent
 * moment even while the server writes (WAL lets the server go on meanwhile). Written beside the
 * target and renamed into place, so a half-written file never carries the target's name.
 */
export async function backupDatabase(databaseFile: string, target: string): Promise<BackupCheck> {
  const partial = join(dirname(target), `.${basename(target)}.partial`);
  rmSync(partial, { force: true });
  const source = new Database(databaseFile, { fileMustExist: true });
  try {
    source.pragma('busy_timeout = 5000');
    // After the first (sizing) step, every remaining page in a single step [ours]: a step holds
    // one read transaction, so no write of the server can slip in between two parts of the copy.
    await source.backup(partial, { progress: () => 0x7fffffff });
  } catch (err) {
    rmSync(partial, { force: true });
    throw err;
  } finally {
    source.close();
  }
  // The copy carries the WAL flag of its source; as a standalone file it is better as a rollback journal.
  const copy = new Database(partial);
  copy.pragma('journal_mode = DELETE');
  copy.close();
  const check = checkDatabaseFile(partial);
  if (!check.ok) {
    rmSync(partial, { force: true });
    throw new Error(`the copy failed its check (${check.problem})`);
  }
  renameSync(partial, target);
  return check;
}

/**
 * True when some other connection has the database open. Leaving WAL mode needs the database to
 * itself, so SQLite refuses it while a server runs; that refusal is the test.
 */
export function databaseInUse(databaseFile: string): boolean {
  const db = new Database(databaseFile, { fileMustExist: true, timeout: 0 });
  try {
    const mode = db.pragma('journal_mode = DELETE', { simple: true });
    return mode !== 'delete';
  } catch {
    return true;
  } finally {
    db.close();
  }
}

export async function backupCommand(args: string[], io: Io, opts: { databaseFile?: string } = {}): Promise<number> {
  if (args.length !== 1 || args[0].startsWith('-')) {
    io.stderr.write(BACKUP_USAGE);
    return 2;
  }
  const refused = refusedOnPostgres('backup', io, opts);
  if (refused !== null) return refused;
  const databaseFile = opts.databaseFile ?? loadConfig().databaseFile;
  const target = resolve(args[0]);
  if (!existsSync(databaseFile)) {
    io.stderr.write(`There is no database at ${databaseFile}; set DATA_DIR to the folder that holds plumbline.sqlite.\n`);
    return 1;
  }
  if (existsSync(target)) {
    io.stderr.write(`${target} already exists; a backup never overwrites a file. Choose a new name.\n`);
    return 1;
  }
  if (!existsSync(dirname(target))) {
    io.stderr.write(`The folder ${dirname(target)} does not exist.\n`);
    return 1;
  }
  try {
    const started = Date.now();
    const check = await backupDatabase(databaseFile, target);
    io.stdout.write(`Backed up to ${target} in ${Date.now() - started} ms: integrity ok, ${check.cases} case(s), ${check.auditRows} audit row(s).\n`);
    return 0;
  } catch (err) {
    io.stderr.write(`The backup failed: ${(err as Error).message}\n`);
    return 1;
  }
}

export async function restoreCommand(args: string[], io: Io, opts: { databaseFile?: string; now?: () => number } = {}): Promise<number> {
  if (args.length !== 1 || args[0].startsWith('-')) {
    io.stderr.write(RESTORE_USAGE);
    return 2;
  }
  const refused = refusedOnPostgres('restore', io, opts);
  if (refused !== null) return refused;
  const databaseFile = opts.databaseFile ?? loadConfig().databaseFile;
  const source = resolve(args[0]);
  if (!existsSync(source)) {
    io.stderr.write(`There is no backup at ${source}.\n`);
    return 1;
  }
  const check = checkDatabaseFile(source);
  if (!check.ok) {
    io.stderr.write(`${source} cannot be restored: ${check.problem}. Nothing was changed.\n`);
    return 1;
  }
  let kept: string | null = null;
  if (existsSync(databaseFile)) {
    if (databaseInUse(databaseFile)) {
      io.stderr.write('A Plumbline server (or another program) has this database open. Stop it first (Ctrl-C, or SIGTERM to its process), then run restore again. Nothing was changed.\n');
      return 1;
    }
    // The database being replaced is kept, never deleted: a wrong restore can be undone.
    kept = `${databaseFile}.before-restore-${new Date((opts.now ?? Date.now)()).toISOString().replace(/[:.]/g, '-')}`;
    renameSync(databaseFile, kept);
    for (const side of ['-wal', '-shm']) rmSync(databaseFile + side, { force: true });
  }
  const partial = `${databaseFile}.restoring`;
  copyFileSync(source, partial);
  renameSync(partial, databaseFile);
  io.stdout.write(
    `Restored ${source}: ${check.cases} case(s), ${check.auditRows} audit row(s).${kept ? ` The previous database is kept as ${kept}.` : ''} ` +
      'Start the server; it brings the schema up to date if the backup is older.\n',
  );
  return 0;
}
