import type { Knex } from 'knex';

// Paging by SMS as well as e-mail: each person's paging contacts, the extra entries and tiers of
// each level's list, every message sent with its delivery state, the re-paging rounds of a case,
// and the replies of the people paged.
export async function up(db: Knex): Promise<void> {
  await db.schema.createTable('paging_contacts', (t) => {
    t.integer('user_id').primary().references('users.id').onDelete('CASCADE');
    t.string('email', 320);
    t.string('mobile', 20); // E.164
    t.bigInteger('updated_at').notNullable();
  });
  await db.schema.createTable('paging_entries', (t) => {
    t.increments('id');
    t.integer('hospital_id').notNullable().references('hospitals.id').onDelete('CASCADE');
    t.string('level', 20).notNullable(); // full | limited | consult
    t.integer('tier').notNullable(); // 1 is the level's own list
    t.string('kind', 10).notNullable(); // person | email | sms
    t.string('value', 320).notNullable(); // a user id, an address or an E.164 number
    t.unique(['hospital_id', 'level', 'tier', 'kind', 'value']);
  });
  await db.schema.createTable('outbound_messages', (t) => {
    t.increments('id');
    t.integer('hospital_id').references('hospitals.id');
    t.integer('case_id').references('cases.id');
    t.string('channel', 10).notNullable(); // sms | email
    t.text('recipient').notNullable();
    t.integer('user_id').references('users.id');
    t.string('subject', 500);
    t.text('body').notNullable();
    t.string('provider_id', 64);
    t.string('state', 20).notNullable(); // queued | sent | delivered | failed | undelivered
    t.string('error', 300);
    t.integer('tier');
    t.integer('round');
    t.integer('fallback_of').references('outbound_messages.id');
    t.bigInteger('created_at').notNullable();
    t.bigInteger('updated_at').notNullable();
    t.index(['hospital_id', 'id']);
    t.index(['provider_id']);
    t.index(['channel', 'recipient']);
  });
  await db.schema.createTable('page_rounds', (t) => {
    t.increments('id');
    t.integer('case_id').notNullable().references('cases.id').onDelete('CASCADE');
    t.bigInteger('paged_at').notNullable(); // the nurse's page this round follows
    t.integer('tier').notNullable();
    t.integer('round').notNullable();
    t.bigInteger('at').notNullable();
    t.unique(['case_id', 'paged_at', 'tier', 'round']);
  });
  await db.schema.createTable('page_replies', (t) => {
    t.increments('id');
    t.integer('case_id').notNullable().references('cases.id').onDelete('CASCADE');
    t.integer('message_id').references('outbound_messages.id');
    t.string('from_number', 20).notNullable();
    t.integer('user_id').references('users.id');
    t.string('answer', 10).notNullable(); // coming | declined | text
    t.string('body', 1600).notNullable();
    t.string('provider_id', 64).notNullable().unique();
    t.bigInteger('at').notNullable();
    t.index(['case_id']);
  });
}

export async function down(db: Knex): Promise<void> {
  await db.schema.dropTableIfExists('page_replies');
  await db.schema.dropTableIfExists('page_rounds');
  await db.schema.dropTableIfExists('outbound_messages');
  await db.schema.dropTableIfExists('paging_entries');
  await db.schema.dropTableIfExists('paging_contacts');
}
