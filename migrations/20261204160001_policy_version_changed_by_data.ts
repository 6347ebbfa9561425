import type { Knex } from 'knex';

// Versions written before the column existed: their author is the last known editor.
export async function up(db: Knex): Promise<void> {
  await db('policy_versions').whereNull('changed_by').update({ changed_by: db.ref('created_by') });
}

export async function down(): Promise<void> {
  // The column goes with its schema migration.
}
