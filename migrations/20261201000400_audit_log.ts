import type { Knex } from 'knex';

// One row per thing that happened, hash-chained, and refused any change by the database itself.
export async function up(db: Knex): Promise<void> {
  await db.schema.createTable('audit_log', (t) => {
    t.increments('id');
    t.bigInteger('at').notNullable();
    t.integer('actor_id').references('users.id');
    t.string('actor_role', 30);
    t.string('action', 60).notNullable();
    t.string('entity', 30).notNullable(); // case | policy | user | hospital | agency | unit | membership | outcome | review
    t.string('entity_id', 64);
    t.integer('case_id').references('cases.id');
    t.text('before'); // JSON or null
    t.text('after'); // JSON or null
    t.string('policy_id', 64);
    t.integer('policy_version');
    t.string('prev_hash', 64).notNullable();
    t.string('hash', 64).notNullable().unique();
  });
  await db.raw('CREATE INDEX audit_log_case ON audit_log (case_id)');
  await db.raw('CREATE INDEX audit_log_entity ON audit_log (entity, entity_id)');
  if (db.client.config.client === 'better-sqlite3' || db.client.config.client === 'sqlite3') {
    await db.raw(`CREATE TRIGGER audit_log_no_update BEFORE UPDATE ON audit_log BEGIN SELECT RAISE(ABORT, 'audit_log is append-only'); END`);
    await db.raw(`CREATE TRIGGER audit_log_no_delete BEFORE DELETE ON audit_log BEGIN SELECT RAISE(ABORT, 'audit_log is append-only'); END`);
  } else if (db.client.config.client === 'pg') {
    await db.raw(`CREATE FUNCTION audit_log_refuse() RETURNS trigger AS $$ BEGIN RAISE EXCEPTION 'audit_log is append-only'; END $$ LANGUAGE plpgsql`);
    await db.raw(`CREATE TRIGGER audit_log_no_change BEFORE UPDATE OR DELETE ON audit_log FOR EACH ROW EXECUTE FUNCTION audit_log_refuse()`);
  }
}

export async function down(db: Knex): Promise<void> {
  await db.raw('DROP TRIGGER IF EXISTS audit_log_no_update');
  await db.raw('DROP TRIGGER IF EXISTS audit_log_no_delete');
  await db.schema.dropTableIfExists('audit_log');
}
