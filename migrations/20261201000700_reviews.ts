import type { Knex } from 'knex';

// The trauma lead's review of a case: signed off, or flagged for peer review until the
// discussion is closed with an outcome. A case may gather several reviews; the latest counts.
export async function up(db: Knex): Promise<void> {
  await db.schema.createTable('reviews', (t) => {
    t.increments('id');
    t.integer('case_id').notNullable().references('cases.id');
    t.string('status', 20).notNullable(); // signed-off | flagged | discussed
    t.text('comment');
    t.text('outcome');
    t.integer('reviewer_id').notNullable().references('users.id');
    t.bigInteger('created_at').notNullable();
    t.integer('closed_by').references('users.id');
    t.bigInteger('closed_at');
  });
  await db.raw('CREATE INDEX reviews_case ON reviews (case_id, id)');
  await db.raw('CREATE INDEX reviews_status ON reviews (status)');
}

export async function down(db: Knex): Promise<void> {
  await db.schema.dropTableIfExists('reviews');
}
