import type { Knex } from 'knex';

// Where the audit chain's keyed part starts. Rows before it were hashed with plain SHA-256
// (before the chain had a key); this row, and every row after it, carries an HMAC under the
// audit key. One row per database, written once; the database refuses to change or remove it.
export async function up(db: Knex): Promise<void> {
  await db.schema.createTable('audit_chain', (t) => {
    t.increments('id');
    t.integer('keyed_from').notNullable().references('audit_log.id');
    t.string('key_id', 16).notNullable();
    t.bigInteger('at').notNullable();
  });
  if (db.client.config.client === 'better-sqlite3' || db.client.config.client === 'sqlite3') {
    await db.raw(`CREATE TRIGGER audit_chain_no_update BEFORE UPDATE ON audit_chain BEGIN SELECT RAISE(ABORT, 'audit_chain is append-only'); END`);
    await db.raw(`CREATE TRIGGER audit_chain_no_delete BEFORE DELETE ON audit_chain BEGIN SELECT RAISE(ABORT, 'audit_chain is append-only'); END`);
  } else if (db.client.config.client === 'pg') {
    await db.raw(`CREATE TRIGGER audit_chain_no_change BEFORE UPDATE OR DELETE ON audit_chain FOR EACH ROW EXECUTE FUNCTION audit_log_refuse()`);
  }
}

export async function down(db: Knex): Promise<void> {
  await db.raw('DROP TRIGGER IF EXISTS audit_chain_no_update');
  await db.raw('DROP TRIGGER IF EXISTS audit_chain_no_delete');
  await db.schema.dropTableIfExists('audit_chain');
}
