import type { Knex } from 'knex';

// The approver's tick that they read the draft's loosening warnings: the warnings they
// acknowledged, as JSON, kept with the approval; null when there were none to acknowledge.
export async function up(db: Knex): Promise<void> {
  await db.schema.alterTable('policy_versions', (t) => {
    t.text('loosening_acknowledged');
  });
}

export async function down(db: Knex): Promise<void> {
  await db.schema.alterTable('policy_versions', (t) => {
    t.dropColumn('loosening_acknowledged');
  });
}
