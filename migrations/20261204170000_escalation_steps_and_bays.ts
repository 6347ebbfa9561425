import type { Knex } from 'knex';

// The escalation step a case has reached at its present hospital (0: none yet), so each step
// fires once; and each hospital's list of bays, which the board offers and shows as occupied.
export async function up(db: Knex): Promise<void> {
  await db.schema.alterTable('cases', (t) => {
    t.integer('escalation_step').notNullable().defaultTo(0);
  });
  await db.schema.createTable('hospital_bays', (t) => {
    t.increments('id');
    t.integer('hospital_id').notNullable().references('hospitals.id').onDelete('CASCADE');
    t.string('name', 40).notNullable();
    t.integer('position').notNullable();
    t.unique(['hospital_id', 'name']);
  });
}

export async function down(db: Knex): Promise<void> {
  await db.schema.dropTable('hospital_bays');
  await db.schema.alterTable('cases', (t) => {
    t.dropColumn('escalation_step');
  });
}
