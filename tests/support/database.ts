import { createHash, randomBytes } from 'node:crypto';
import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import knex, { type Knex } from 'knex';
import { it, type TestFunction } from 'vitest';
import { createDb, migrate } from '../../server/db';

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

const adminConnection = (url: string) => knex({ client: 'pg', connection: url, pool: { min: 0, max: 1 } });
const withUrlPath = (url: string, name: string) => Object.assign(new URL(url), { pathname: `/${name}` }).href;

/**
 * A database with every migration applied, copied for each test server (CREATE DATABASE …
 * TEMPLATE), so a server does not spend its start migrating. Its name carries a digest of the
 * migration files, so a changed migration makes a new one; the first worker to need it makes it.
 */
async function migratedTemplate(admin: Knex, adminUrl: string): Promise<string> {
  const dir = join(import.meta.dirname, '../../migrations');
  const digest = createHash('sha256');
  for (const name of readdirSync(dir).sort()) digest.update(name).update(readFileSync(join(dir, name)));
  const name = `plumbline_template_${digest.digest('hex').slice(0, 12)}`;
  // One maker at a time across the suite's workers; the lock ends with this session.
  await admin.transaction(async (trx) => {
    await trx.raw("SELECT pg_advisory_xact_lock(hashtext('plumbline test template'))");
    if ((await trx('pg_database').where({ datname: name }).first('datname'))) return;
    const building = `${name}_building`;
    // CREATE and DROP DATABASE cannot run in a transaction: through another session.
    const side = adminConnection(adminUrl);
    try {
      await side.raw('DROP DATABASE IF EXISTS ?? WITH (FORCE)', [building]);
      await side.raw('CREATE DATABASE ??', [building]);
      const db = createDb(withUrlPath(adminUrl, building), { auditKey: randomBytes(32) });
      try {
        await migrate(db);
      } finally {
        await db.destroy();
      }
      await side.raw('ALTER DATABASE ?? RENAME TO ??', [building, name]);
    } finally {
      await side.destroy();
    }
  });
  return name;
}

/** A new PostgreSQL database with a random name on the TEST_DATABASE_URL server, migrated, with no data. */
export async function createTestDatabase(): Promise<TestDatabase> {
  const url = adminUrl();
  const name = `plumbline_test_${randomBytes(6).toString('hex')}`;
  const admin = adminConnection(url);
  try {
    const template = await migratedTemplate(admin, url);
    for (let attempt = 0; ; attempt++) {
      try {
        await admin.raw('CREATE DATABASE ?? TEMPLATE ??', [name, template]);
        break;
      } catch (err) {
        // Another worker copying the template at this instant: try again shortly.
        if (!/being accessed by other users/.test(String(err)) || attempt >= 50) throw err;
        await new Promise((r) => setTimeout(r, 50 + Math.random() * 150));
      }
    }
  } finally {
    await admin.destroy();
  }
  return {
    url: withUrlPath(url, name),
    async drop() {
      const db = adminConnection(url);
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
