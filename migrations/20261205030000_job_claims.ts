import type { Knex } from 'knex';

// A timed job that must run once per period across every server process of a region (the
// hourly audit checkpoint) claims its period here first: the process whose insert lands does
// the work, the others see the row and skip it.
export async function up(db: Knex): Promise<void> {
  await db.schema.createTable('job_claims', (t) => {
    t.string('job', 80).notNullable();
    /** The start of the period claimed, ms since the epoch. */
    t.bigInteger('period_start').notNullable();
    t.bigInteger('claimed_at').notNullable();
    /** Which process took it (host and process id), for the log reader. */
    t.string('claimed_by', 200).notNullable();
    t.primary(['job', 'period_start']);
  });
}

export async function down(db: Knex): Promise<void> {
  await db.schema.dropTableIfExists('job_claims');
}
