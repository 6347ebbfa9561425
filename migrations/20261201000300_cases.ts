import type { Knex } from 'knex';

// A case is one patient on the way in; each pre-alert or update is a revision with its own
// evaluation, and each step on the case is an event. Times are milliseconds since the epoch.
export async function up(db: Knex): Promise<void> {
  await db.schema.createTable('cases', (t) => {
    t.increments('id');
    t.string('case_number', 30).notNullable().unique();
    // Made by the ambulance's browser, so a retried pre-alert can never become a second case.
    t.string('client_id', 64).notNullable().unique();
    t.integer('agency_id').notNullable().references('agencies.id');
    t.integer('unit_id').references('units.id');
    t.integer('hospital_id').notNullable().references('hospitals.id');
    t.integer('created_by').notNullable().references('users.id');
    t.string('state', 20).notNullable(); // en-route | acknowledged | arrived | closed | cancelled
    t.integer('current_revision').notNullable().defaultTo(1);
    t.bigInteger('eta_at');
    t.string('field_risk', 10).notNullable();
    t.string('recommended_level', 10).notNullable();
    t.boolean('level_rose').notNullable().defaultTo(false);
    t.string('decided_level', 10);
    t.text('decided_reason');
    t.integer('decided_by').references('users.id');
    t.bigInteger('decided_at');
    t.integer('acknowledged_by').references('users.id');
    t.bigInteger('acknowledged_at');
    t.string('bay', 40);
    t.bigInteger('paged_at');
    t.bigInteger('arrived_at');
    t.bigInteger('team_at_bedside_at');
    t.bigInteger('closed_at');
    t.bigInteger('cancelled_at');
    t.text('cancel_reason');
    t.bigInteger('overdue_at');
    t.string('policy_id', 64).notNullable();
    t.integer('policy_version').notNullable();
    t.bigInteger('created_at').notNullable();
    t.bigInteger('updated_at').notNullable();
    // Bumped on every change: an action carries the version it saw, so the first of two wins.
    t.integer('row_version').notNullable().defaultTo(1);
  });
  await db.raw('CREATE INDEX cases_hospital_state ON cases (hospital_id, state)');
  await db.raw('CREATE INDEX cases_agency_state ON cases (agency_id, state)');
  await db.raw('CREATE INDEX cases_created ON cases (created_at)');

  await db.schema.createTable('case_revisions', (t) => {
    t.increments('id');
    t.integer('case_id').notNullable().references('cases.id').onDelete('CASCADE');
    t.integer('revision').notNullable();
    t.text('input').notNullable(); // the clinical input, JSON, as the shared schema parsed it
    t.text('result').notNullable(); // the evaluation, JSON
    t.string('criteria_set', 20).notNullable();
    t.string('policy_id', 64).notNullable();
    t.integer('policy_version').notNullable();
    t.string('field_risk', 10).notNullable();
    t.string('activation', 10).notNullable();
    t.integer('eta_minutes');
    t.text('notes');
    t.integer('created_by').notNullable().references('users.id');
    t.bigInteger('created_at').notNullable();
    t.unique(['case_id', 'revision']);
  });

  await db.schema.createTable('case_events', (t) => {
    t.increments('id');
    t.integer('case_id').notNullable().references('cases.id').onDelete('CASCADE');
    t.string('kind', 40).notNullable();
    t.integer('actor_id').references('users.id');
    t.string('actor_role', 30);
    t.bigInteger('at').notNullable();
    t.text('data'); // JSON
  });
  await db.raw('CREATE INDEX case_events_case ON case_events (case_id, at)');
}

export async function down(db: Knex): Promise<void> {
  await db.schema.dropTableIfExists('case_events');
  await db.schema.dropTableIfExists('case_revisions');
  await db.schema.dropTableIfExists('cases');
}
