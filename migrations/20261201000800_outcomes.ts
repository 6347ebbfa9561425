import type { Knex } from 'knex';

// Registry outcomes per case, and what the triage-quality report reads of each case's latest
// revision (fall height, fired criteria), kept in columns so a year of a busy centre is one
// indexed scan rather than a JSON parse per case.
export async function up(db: Knex): Promise<void> {
  await db.schema.createTable('outcomes', (t) => {
    t.integer('case_id').primary().references('cases.id').onDelete('CASCADE');
    t.integer('iss');
    t.integer('niss');
    t.text('ais'); // JSON [{ region, ais }] when the registry gave injuries
    t.boolean('red_cells_4h');
    // NFTI fields: null = did not happen; the *_known flags tell "not recorded" apart.
    t.float('minutes_to_or');
    t.float('minutes_to_ir');
    t.float('icu_days');
    t.float('hours_to_ventilation');
    t.float('hours_to_death');
    t.text('nfti_known'); // JSON list of the NFTI fields the registry recorded
    t.boolean('nfti_given');
    t.boolean('nfti_positive');
    t.string('disposition', 40);
    t.bigInteger('imported_at').notNullable();
    t.integer('imported_by').references('users.id');
    t.string('batch', 40).notNullable();
  });
  await db.raw('CREATE INDEX outcomes_batch ON outcomes (batch)');
  await db.raw('CREATE INDEX cases_hospital_created ON cases (hospital_id, created_at)');

  await db.schema.createTable('case_quality_facts', (t) => {
    t.integer('case_id').primary().references('cases.id').onDelete('CASCADE');
    t.integer('revision').notNullable();
    t.float('height_m');
    t.text('criteria').notNullable().defaultTo(''); // fired criterion ids, space-separated
  });
  // Derived in the database, so every writer of revisions keeps it right without knowing of it.
  if (db.client.config.client === 'pg') {
    await db.raw(`
      CREATE FUNCTION case_quality_facts_fill() RETURNS trigger AS $$ BEGIN
        INSERT INTO case_quality_facts (case_id, revision, height_m, criteria)
        VALUES (
          NEW.case_id, NEW.revision, (NEW.input::jsonb #>> '{fall,heightM}')::double precision,
          COALESCE((SELECT string_agg(c->>'id', ' ') FROM jsonb_array_elements(NEW.result::jsonb->'criteria') c), '')
        )
        ON CONFLICT (case_id) DO UPDATE SET revision = excluded.revision, height_m = excluded.height_m, criteria = excluded.criteria
        WHERE excluded.revision >= case_quality_facts.revision;
        RETURN NEW;
      END $$ LANGUAGE plpgsql`);
    await db.raw('CREATE TRIGGER case_quality_facts_from_revision AFTER INSERT ON case_revisions FOR EACH ROW EXECUTE FUNCTION case_quality_facts_fill()');
    await db.raw(`
      INSERT INTO case_quality_facts (case_id, revision, height_m, criteria)
      SELECT r.case_id, r.revision, (r.input::jsonb #>> '{fall,heightM}')::double precision,
        COALESCE((SELECT string_agg(c->>'id', ' ') FROM jsonb_array_elements(r.result::jsonb->'criteria') c), '')
      FROM case_revisions r JOIN cases c ON c.id = r.case_id AND r.revision = c.current_revision`);
    return;
  }
  await db.raw(`
    CREATE TRIGGER case_quality_facts_from_revision AFTER INSERT ON case_revisions BEGIN
      INSERT INTO case_quality_facts (case_id, revision, height_m, criteria)
      VALUES (
        NEW.case_id, NEW.revision, json_extract(NEW.input, '$.fall.heightM'),
        COALESCE((SELECT group_concat(json_extract(value, '$.id'), ' ') FROM json_each(NEW.result, '$.criteria')), '')
      )
      ON CONFLICT (case_id) DO UPDATE SET revision = excluded.revision, height_m = excluded.height_m, criteria = excluded.criteria
      WHERE excluded.revision >= case_quality_facts.revision;
    END`);
  // The table is a cache of the revisions, so it must be complete the moment it exists.
  await db.raw(`
    INSERT INTO case_quality_facts (case_id, revision, height_m, criteria)
    SELECT r.case_id, r.revision, json_extract(r.input, '$.fall.heightM'),
      COALESCE((SELECT group_concat(json_extract(value, '$.id'), ' ') FROM json_each(r.result, '$.criteria')), '')
    FROM case_revisions r JOIN cases c ON c.id = r.case_id AND r.revision = c.current_revision`);
}

export async function down(db: Knex): Promise<void> {
  await db.raw(db.client.config.client === 'pg' ? 'DROP TRIGGER IF EXISTS case_quality_facts_from_revision ON case_revisions' : 'DROP TRIGGER IF EXISTS case_quality_facts_from_revision');
  if (db.client.config.client === 'pg') await db.raw('DROP FUNCTION IF EXISTS case_quality_facts_fill()');
  await db.schema.dropTableIfExists('case_quality_facts');
  await db.raw('DROP INDEX IF EXISTS cases_hospital_created');
  await db.schema.dropTableIfExists('outcomes');
}
