import type { Knex } from 'knex';

// A checked outcomes file waiting for its confirm, kept in the database (not in one process's
// memory) so a restart or another process serving the confirm still finds it until it expires.
// The token itself is not stored, only its SHA-256.
export async function up(db: Knex): Promise<void> {
  await db.schema.createTable('outcome_import_previews', (t) => {
    t.string('token_hash', 64).primary();
    t.integer('user_id').notNullable().references('users.id').onDelete('CASCADE');
    t.integer('hospital_id').notNullable().references('hospitals.id').onDelete('CASCADE');
    t.string('file_name', 255).notNullable();
    t.binary('file').notNullable();
    t.bigInteger('created_at').notNullable();
    t.bigInteger('expires_at').notNullable();
    t.index(['expires_at'], 'outcome_import_previews_expires');
  });
}

export async function down(db: Knex): Promise<void> {
  await db.schema.dropTableIfExists('outcome_import_previews');
}
