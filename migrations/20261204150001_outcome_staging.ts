import type { Knex } from 'knex';

// An outcomes import is written here in short transactions first, then moved into `outcomes`
// by one statement, so a large file never holds the database for long and is never half-saved.
export async function up(db: Knex): Promise<void> {
  await db.schema.createTable('outcome_staging', (t) => {
    t.increments('id');
    t.string('batch', 40).notNullable();
    t.integer('case_id').notNullable().references('cases.id').onDelete('CASCADE');
    t.integer('iss');
    t.integer('niss');
    t.text('ais');
    t.boolean('red_cells_4h');
    t.float('minutes_to_or');
    t.float('minutes_to_ir');
    t.float('icu_days');
    t.float('hours_to_ventilation');
    t.float('hours_to_death');
    t.text('nfti_known');
    t.boolean('nfti_given');
    t.boolean('nfti_positive');
    t.string('disposition', 40);
    t.bigInteger('imported_at').notNullable();
    t.integer('imported_by').references('users.id');
  });
  await db.raw('CREATE INDEX outcome_staging_batch ON outcome_staging (batch, id)');
}

export async function down(db: Knex): Promise<void> {
  await db.schema.dropTableIfExists('outcome_staging');
}
