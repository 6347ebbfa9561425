import type { Knex } from 'knex';

// Each hospital's activation policy, version by version: draft → approved → published.
// A published version never changes; the version that decided a case is kept on the case.
export async function up(db: Knex): Promise<void> {
  await db.schema.createTable('policy_versions', (t) => {
    t.increments('id');
    t.integer('hospital_id').notNullable().references('hospitals.id').onDelete('CASCADE');
    t.string('policy_id', 64).notNullable();
    t.integer('version').notNullable();
    t.string('status', 20).notNullable(); // draft | approved | published | retired
    t.text('document').notNullable(); // the engine's Policy, JSON
    t.integer('created_by').references('users.id');
    t.bigInteger('created_at').notNullable();
    t.integer('approved_by').references('users.id');
    t.string('approved_by_name', 200);
    t.bigInteger('approved_at');
    t.integer('published_by').references('users.id');
    t.bigInteger('published_at');
    t.bigInteger('effective_from');
    t.unique(['hospital_id', 'policy_id', 'version']);
  });
  await db.raw('CREATE INDEX policy_versions_live ON policy_versions (hospital_id, status, effective_from)');
}

export async function down(db: Knex): Promise<void> {
  await db.schema.dropTableIfExists('policy_versions');
}
