import type { Knex } from 'knex';

// Which hospital a message was sent for, so the Mail sent page shows an administrator only their
// own hospitals' pages, whatever the notification lists hold later.
export async function up(db: Knex): Promise<void> {
  await db.schema.alterTable('mail_messages', (t) => {
    t.integer('hospital_id').references('hospitals.id');
  });
  await db.raw('CREATE INDEX mail_messages_hospital ON mail_messages (hospital_id, id)');
}

export async function down(db: Knex): Promise<void> {
  await db.raw('DROP INDEX IF EXISTS mail_messages_hospital');
  await db.schema.alterTable('mail_messages', (t) => {
    t.dropColumn('hospital_id');
  });
}
