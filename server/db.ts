import { readdirSync } from 'node:fs';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import knex, { type Knex } from 'knex';

export type Db = Knex;

const migrationsDir = resolve(dirname(fileURLToPath(import.meta.url)), '../migrations');

interface MigrationModule { up(db: Knex): Promise<void>; down(db: Knex): Promise<void> }

// Knex's own loader cannot import TypeScript; importing from here lets tsx (and Vitest) do it.
const migrationSource: Knex.MigrationSource<string> = {
  async getMigrations() {
    return readdirSync(migrationsDir).filter((name) => /^\d{14}_.+\.ts$/.test(name)).sort();
  },
  getMigrationName: (name) => name,
  async getMigration(name) {
    return (await import(pathToFileURL(join(migrationsDir, name)).href)) as MigrationModule;
  },
};

export function createDb(filename: string): Db {
  return knex({
    client: 'better-sqlite3',
    connection: { filename },
    useNullAsDefault: true,
    pool: {
      min: 1,
      max: 1,
      afterCreate(conn: { pragma(sql: string): unknown }, done: (err: Error | null, conn: unknown) => void) {
        // WAL lets readers go on while a pre-alert is written; foreign keys are off by default in SQLite.
        conn.pragma('journal_mode = WAL');
        conn.pragma('synchronous = NORMAL');
        conn.pragma('foreign_keys = ON');
        conn.pragma('busy_timeout = 5000');
        done(null, conn);
      },
    },
    migrations: { migrationSource, tableName: 'knex_migrations' },
  });
}

export async function migrate(db: Db): Promise<string[]> {
  const [, applied] = (await db.migrate.latest()) as [number, string[]];
  return applied;
}

/** Milliseconds since the epoch: one portable representation for every timestamp column. */
export const now = (clock: { now(): number }) => clock.now();
