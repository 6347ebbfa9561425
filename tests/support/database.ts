import { randomBytes } from 'node:crypto';
import knex from 'knex';
import { it, type TestFunction } from 'vitest';

// The integration suite runs twice when TEST_DATABASE_URL names a PostgreSQL server: once on
// SQLite and once, as the `postgres` Vitest project (TEST_ENGINE=postgres), on PostgreSQL. Each
// test server then gets a database of its own, made from the admin URL and dropped after.

/** True in the PostgreSQL pass of the suite. */
export const onPostgres = process.env.TEST_ENGINE === 'postgres';

/**
 * A test of something only SQLite has (its file, WAL, its backup API): run as `it` on SQLite,
 * skipped in the PostgreSQL pass with the reason in its name, so the report says why.
 */
export function itOnSqlite(reason: string) {
  return (name: string, fn: TestFunction, timeout?: number) => (onPostgres ? it.skip(`${name} [SQLite only: ${reason}]`, fn) : it(name, fn, timeout));
}

function adminUrl(): string {
  const url = process.env.TEST_DATABASE_URL;
  if (!url) throw new Error('TEST_ENGINE=postgres needs TEST_DATABASE_URL, a PostgreSQL URL whose user may CREATE DATABASE');
  return url;
}

export interface TestDatabase {
  /** The new database's URL, for DATABASE_URL or the config's databaseUrl. */
  url: string;
  /** Drops the database, closing any connection still open to it. */
  drop(): Promise<void>;
}

/** A new, empty PostgreSQL database with a random name on the TEST_DATABASE_URL server. */
export async function createTestDatabase(): Promise<TestDatabase> {
  const admin = new URL(adminUrl());
  const name = `plumbline_test_${randomBytes(6).toString('hex')}`;
  const adminDb = knex({ client: 'pg', connection: admin.href, pool: { min: 0, max: 1 } });
  try {
    await adminDb.raw('CREATE DATABASE ??', [name]);
  } finally {
    await adminDb.destroy();
  }
  const url = new URL(admin.href);
  url.pathname = `/${name}`;
  return {
    url: url.href,
    async drop() {
      const db = knex({ client: 'pg', connection: admin.href, pool: { min: 0, max: 1 } });
      try {
        await db.raw('DROP DATABASE IF EXISTS ?? WITH (FORCE)', [name]);
      } finally {
        await db.destroy();
      }
    },
  };
}

/** What a child `plumbline` process needs in its environment to open the same database. */
export function databaseEnv(config: { databaseUrl: string | null }): Record<string, string> {
  return config.databaseUrl ? { DATABASE_URL: config.databaseUrl } : {};
}
