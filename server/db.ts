import { randomBytes } from 'node:crypto';
import { readdirSync } from 'node:fs';
import { createRequire } from 'node:module';
import { dirname, join, resolve } from 'node:path';
import { pathToFileURL } from 'node:url';
import knex, { type Knex } from 'knex';
import { LRUCache } from 'lru-cache';
import { loadAuditKey } from './audit-key';
import { migrationsDir } from './paths';
import { useAuditKey } from './services/audit/audit';

export type Db = Knex;


interface MigrationModule { up(db: Knex): Promise<void>; down(db: Knex): Promise<void> }

// Knex's own loader cannot import TypeScript; importing from here lets tsx (and Vitest) do it.
// The build runs the compiled copies (dist/server/migrations/*.js) under the names the sources
// gave them, so a database migrated by either knows the same migrations.
const migrationSource: Knex.MigrationSource<string> = {
  async getMigrations() {
    return readdirSync(migrationsDir).filter((name) => /^\d{14}_.+\.(ts|js)$/.test(name)).sort();
  },
  getMigrationName: (name) => name.replace(/\.js$/, '.ts'),
  async getMigration(name) {
    return (await import(pathToFileURL(join(migrationsDir, name)).href)) as MigrationModule;
  },
};

export interface SqliteConnection {
  pragma(sql: string): unknown;
  prepare(sql: string): unknown;
}

/**
 * Knex prepares every query's SQL anew, and SQLite spends more on preparing a small statement
 * than on running it. Statements are kept per connection by their SQL text, at most `size` of
 * them, the least recently used going first. Knex runs a statement to its end with all() or run()
 * before the next one starts, so a kept statement is never in use twice; SQLite prepares a kept
 * statement again by itself after a schema change.
 */
export function keepStatements(conn: SqliteConnection, size = 500): void {
  const prepare = conn.prepare.bind(conn);
  const kept = new LRUCache<string, object>({ max: size });
  conn.prepare = (sql: string) => {
    let statement = kept.get(sql);
    if (statement === undefined) kept.set(sql, (statement = prepare(sql) as object));
    return statement;
  };
}

/** True for a PostgreSQL connection URL (DATABASE_URL), false for an SQLite file name. */
export const isPostgresUrl = (target: string) => /^postgres(ql)?:\/\//.test(target);

/** True when the database is PostgreSQL; the one test every dialect branch uses. */
export const isPostgres = (db: Knex) => db.client.config.client === 'pg';

/**
 * PostgreSQL answers bigint (int8) and count(*) as strings, since they may exceed 2^53. Every
 * bigint here is a time in ms or an id, far below that, so they come back as numbers, as SQLite
 * gives them. A value past Number.MAX_SAFE_INTEGER would be an error, not a rounding. The driver
 * is loaded here, when a PostgreSQL database is opened, not by every SQLite server's start; it is
 * the same module instance Knex's pg client then uses.
 */
function setUpPostgresTypes(): void {
  const pg = createRequire(import.meta.url)('pg') as typeof import('pg');
  pg.types.setTypeParser(pg.types.builtins.INT8, (text) => {
    const n = Number(text);
    if (!Number.isSafeInteger(n)) throw new Error(`a bigint column holds ${text}, past the largest safe number`);
    return n;
  });
  // numeric (from AVG, SUM over integers, ROUND) as a number too, as SQLite answers it.
  pg.types.setTypeParser(pg.types.builtins.NUMERIC, (text) => Number(text));
}

/**
 * Transactions take SQLite's write lock when they begin. Several processes may share one file
 * (WAL allows it on one machine); a transaction that read first and wrote later would fail at
 * its first write whenever another process had committed in between, instead of waiting its turn.
 */
export function beginImmediately(conn: SqliteConnection): void {
  const prepare = conn.prepare.bind(conn);
  conn.prepare = (sql: string) => prepare(sql === 'BEGIN;' ? 'BEGIN IMMEDIATE;' : sql);
}

/**
 * Opens the database with its audit key: `auditKey` when given, else AUDIT_KEY or the key file
 * in the database's folder (DATA_DIR; `keyDir` for a PostgreSQL URL). An in-memory database gets
 * a key of its own for its life.
 */
export function createDb(target: string, opts: { auditKey?: Buffer; keyDir?: string } = {}): Db {
  if (isPostgresUrl(target)) {
    setUpPostgresTypes();
    const db = knex({
      client: 'pg',
      connection: target,
      pool: { min: 0, max: 10 },
      migrations: { migrationSource, tableName: 'knex_migrations' },
    });
    useAuditKey(db, opts.auditKey ?? loadAuditKey(resolve(opts.keyDir ?? process.env.DATA_DIR ?? './data')));
    return db;
  }
  const filename = target;
  const memory = filename === ':memory:' || filename === '';
  const db = knex({
    client: 'better-sqlite3',
    connection: { filename },
    useNullAsDefault: true,
    pool: {
      min: 1,
      max: 1,
      afterCreate(conn: SqliteConnection, done: (err: Error | null, conn: unknown) => void) {
        // WAL lets readers go on while a pre-alert is written; foreign keys are off by default in SQLite.
        conn.pragma('journal_mode = WAL');
        conn.pragma('synchronous = NORMAL');
        conn.pragma('foreign_keys = ON');
        conn.pragma('busy_timeout = 5000');
        keepStatements(conn);
        beginImmediately(conn);
        done(null, conn);
      },
    },
    migrations: { migrationSource, tableName: 'knex_migrations' },
  });
  useAuditKey(db, opts.auditKey ?? (memory ? randomBytes(32) : loadAuditKey(dirname(resolve(filename)))));
  return db;
}

/** The configured database: PostgreSQL when DATABASE_URL is set, else the SQLite file in DATA_DIR. */
export function openDb(config: { databaseUrl: string | null; databaseFile: string; dataDir: string }): Db {
  return createDb(config.databaseUrl ?? config.databaseFile, { keyDir: config.dataDir });
}

export async function migrate(db: Db): Promise<string[]> {
  const [, applied] = (await db.migrate.latest()) as [number, string[]];
  return applied;
}

/** Milliseconds since the epoch: one portable representation for every timestamp column. */
export const now = (clock: { now(): number }) => clock.now();

/**
 * The rows of a raw SELECT: better-sqlite3 answers them as the array itself, pg as `{ rows }`.
 * Prefer the query builder; where SQL must be written out, read it through here.
 */
export async function selectRows<T>(db: Knex, sql: string, bindings: readonly Knex.RawBinding[] = []): Promise<T[]> {
  const result = (await db.raw(sql, bindings)) as T[] | { rows: T[] };
  return Array.isArray(result) ? result : result.rows;
}

/** A unique constraint refused the row: SQLite's SQLITE_CONSTRAINT_UNIQUE or PostgreSQL's 23505. */
export function isUniqueViolation(err: unknown): boolean {
  const code = (err as { code?: unknown } | null)?.code;
  return code === '23505' || code === 'SQLITE_CONSTRAINT_UNIQUE' || code === 'SQLITE_CONSTRAINT_PRIMARYKEY';
}
