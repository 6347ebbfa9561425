import type { Knex } from 'knex';

// The built-in identity provider's state (sign-in sessions, codes, grants), so a restart of the
// server does not sign everybody out of the provider.
export async function up(db: Knex): Promise<void> {
  await db.schema.createTable('identity_store', (t) => {
    t.string('model', 40).notNullable();
    t.string('id', 200).notNullable();
    t.text('payload').notNullable();
    t.string('uid', 200);
    t.string('grant_id', 200);
    t.string('user_code', 200);
    t.bigInteger('expires_at');
    t.bigInteger('consumed_at');
    t.primary(['model', 'id']);
  });
  await db.raw('CREATE INDEX identity_store_uid ON identity_store (uid)');
  await db.raw('CREATE INDEX identity_store_grant ON identity_store (grant_id)');
  await db.raw('CREATE INDEX identity_store_expires ON identity_store (expires_at)');
}

export async function down(db: Knex): Promise<void> {
  await db.schema.dropTableIfExists('identity_store');
}
