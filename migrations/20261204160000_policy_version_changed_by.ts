import type { Knex } from 'knex';

// Who last changed a policy version's draft: neither its author nor its last editor may approve it.
export async function up(db: Knex): Promise<void> {
  await db.schema.alterTable('policy_versions', (t) => {
    t.integer('changed_by').references('users.id');
  });
}

export async function down(db: Knex): Promise<void> {
  await db.schema.alterTable('policy_versions', (t) => {
    t.dropColumn('changed_by');
  });
}
