import type { Knex } from 'knex';

// What the engine reads of each case's latest clinical input, kept compact (two text cells a case,
// laid out in server/services/cases/evaluation-input.ts), so that a what-if over a year of cases
// reads a narrow table instead of every revision's JSON.
export async function up(db: Knex): Promise<void> {
  await db.schema.createTable('case_evaluation_inputs', (t) => {
    t.integer('case_id').primary().references('cases.id').onDelete('CASCADE');
    t.integer('revision').notNullable();
    t.string('numbers', 400).notNullable();
    t.string('words', 1000).notNullable();
  });
}

export async function down(db: Knex): Promise<void> {
  await db.schema.dropTableIfExists('case_evaluation_inputs');
}
