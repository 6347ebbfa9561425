import type { Knex } from 'knex';

// Machine clients: an ambulance service's record or dispatch system that sends pre-alerts for one
// agency with OAuth client credentials. Each has its own account row, so the audit log and the
// cases it sends name it as the actor. A case remembers where it came from (null: a crew's screen).
export async function up(db: Knex): Promise<void> {
  await db.schema.createTable('machine_clients', (t) => {
    t.increments('id');
    t.string('client_id', 80).notNullable().unique();
    t.string('name', 200).notNullable();
    t.integer('agency_id').notNullable().references('agencies.id').onDelete('CASCADE');
    t.integer('user_id').notNullable().unique().references('users.id');
    t.integer('requests_per_minute').notNullable().defaultTo(60);
    t.boolean('active').notNullable().defaultTo(true);
    t.integer('created_by').references('users.id');
    t.bigInteger('created_at').notNullable();
    t.bigInteger('revoked_at');
  });
  await db.schema.alterTable('cases', (t) => {
    t.string('source', 200);
  });
}

export async function down(db: Knex): Promise<void> {
  await db.schema.alterTable('cases', (t) => {
    t.dropColumn('source');
  });
  await db.schema.dropTableIfExists('machine_clients');
}
