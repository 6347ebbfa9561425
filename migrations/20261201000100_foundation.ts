import type { Knex } from 'knex';

// Hospitals, ambulance agencies, people and sessions: what every later table refers to.
export async function up(db: Knex): Promise<void> {
  await db.schema.createTable('hospitals', (t) => {
    t.increments('id');
    t.string('name', 200).notNullable().unique();
    t.string('short_name', 40).notNullable();
    t.string('trauma_level', 20).notNullable(); // 'I' | 'II' | 'III' | 'IV' | 'none'
    t.string('height_unit', 10).notNullable().defaultTo('m'); // 'm' | 'ft' | 'storeys'
    t.integer('escalation_minutes').notNullable().defaultTo(2);
    t.bigInteger('created_at').notNullable();
  });
  await db.schema.createTable('agencies', (t) => {
    t.increments('id');
    t.string('name', 200).notNullable().unique();
    t.bigInteger('created_at').notNullable();
  });
  await db.schema.createTable('units', (t) => {
    t.increments('id');
    t.integer('agency_id').notNullable().references('agencies.id').onDelete('CASCADE');
    t.string('call_sign', 40).notNullable();
    t.boolean('active').notNullable().defaultTo(true);
    t.unique(['agency_id', 'call_sign']);
  });
  await db.schema.createTable('agency_hospitals', (t) => {
    t.integer('agency_id').notNullable().references('agencies.id').onDelete('CASCADE');
    t.integer('hospital_id').notNullable().references('hospitals.id').onDelete('CASCADE');
    t.primary(['agency_id', 'hospital_id']);
  });
  await db.schema.createTable('users', (t) => {
    t.increments('id');
    t.string('email', 320).notNullable().unique();
    t.string('name', 200).notNullable();
    // Only the built-in identity provider uses a password; an external issuer never does.
    t.string('password_hash', 200);
    t.boolean('active').notNullable().defaultTo(true);
    t.bigInteger('created_at').notNullable();
  });
  await db.schema.createTable('user_roles', (t) => {
    t.integer('user_id').notNullable().references('users.id').onDelete('CASCADE');
    t.string('role', 30).notNullable();
    t.primary(['user_id', 'role']);
  });
  await db.schema.createTable('memberships', (t) => {
    t.increments('id');
    t.integer('user_id').notNullable().references('users.id').onDelete('CASCADE');
    t.integer('hospital_id').references('hospitals.id').onDelete('CASCADE');
    t.integer('agency_id').references('agencies.id').onDelete('CASCADE');
    t.unique(['user_id', 'hospital_id', 'agency_id']);
  });
  await db.raw('CREATE INDEX memberships_user ON memberships (user_id)');
  // The shape connect-session-knex expects; user_id is ours, so deactivating a user can end their sessions.
  await db.schema.createTable('sessions', (t) => {
    t.string('sid', 255).primary();
    t.json('sess').notNullable();
    t.timestamp('expired').notNullable().index();
  });
}

export async function down(db: Knex): Promise<void> {
  for (const table of ['sessions', 'memberships', 'user_roles', 'users', 'agency_hospitals', 'units', 'agencies', 'hospitals']) {
    await db.schema.dropTableIfExists(table);
  }
}
