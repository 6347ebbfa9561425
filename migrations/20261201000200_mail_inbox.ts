import type { Knex } from 'knex';

// What the built-in SMTP fake received, so an administrator can read the pages that went out.
export async function up(db: Knex): Promise<void> {
  await db.schema.createTable('mail_messages', (t) => {
    t.increments('id');
    t.bigInteger('received_at').notNullable();
    t.string('sender', 320).notNullable();
    t.text('recipients').notNullable(); // JSON array of addresses
    t.string('subject', 500).notNullable();
    t.text('text').notNullable();
    t.string('message_id', 300);
  });
}

export async function down(db: Knex): Promise<void> {
  await db.schema.dropTableIfExists('mail_messages');
}
