import type { Knex } from 'knex';

// Who is paged for each level (and told of overdue acknowledgements), and per-hospital settings.
export async function up(db: Knex): Promise<void> {
  await db.schema.createTable('notification_lists', (t) => {
    t.integer('hospital_id').notNullable().references('hospitals.id').onDelete('CASCADE');
    t.string('list', 20).notNullable(); // full | limited | consult | escalation
    t.string('email', 320).notNullable();
    t.primary(['hospital_id', 'list', 'email']);
  });
  await db.schema.createTable('settings', (t) => {
    // hospital_id 0 holds the product-wide defaults.
    t.integer('hospital_id').notNullable().defaultTo(0);
    t.string('key', 60).notNullable();
    t.text('value').notNullable(); // JSON
    t.primary(['hospital_id', 'key']);
  });
}

export async function down(db: Knex): Promise<void> {
  await db.schema.dropTableIfExists('settings');
  await db.schema.dropTableIfExists('notification_lists');
}
