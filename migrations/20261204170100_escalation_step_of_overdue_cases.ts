import type { Knex } from 'knex';

// A case already marked overdue has had the first escalation step.
export async function up(db: Knex): Promise<void> {
  await db('cases').whereNotNull('overdue_at').update({ escalation_step: 1 });
}

export async function down(): Promise<void> {
  // The column goes with the schema change's own down.
}
