import type { Knex } from 'knex';

// A new case holds its sending device's id (a UUID, 36 characters) as its case number until the
// number is made from the row's id, in the same transaction. SQLite never enforced the column's
// 30 characters; PostgreSQL does, so the column takes 64 there. SQLite needs no change.
export async function up(db: Knex): Promise<void> {
  if (db.client.config.client !== 'pg') return;
  await db.schema.alterTable('cases', (t) => {
    t.string('case_number', 64).notNullable().alter({ alterNullable: false });
  });
}

export async function down(db: Knex): Promise<void> {
  if (db.client.config.client !== 'pg') return;
  await db.schema.alterTable('cases', (t) => {
    t.string('case_number', 30).notNullable().alter({ alterNullable: false });
  });
}
