import type { Knex } from 'knex';

// Knex's float is an 8-byte REAL on SQLite but a 4-byte real on PostgreSQL, which rounds a fall
// of 6.1 m to 6.0999999 (on the wrong side of a height band) and refuses very small values. On
// PostgreSQL these columns become double precision, as SQLite stores them. SQLite needs no change.
const FLOATS: Record<string, string[]> = {
  outcomes: ['minutes_to_or', 'minutes_to_ir', 'icu_days', 'hours_to_ventilation', 'hours_to_death'],
  outcome_staging: ['minutes_to_or', 'minutes_to_ir', 'icu_days', 'hours_to_ventilation', 'hours_to_death'],
  case_quality_facts: ['height_m'],
};

async function retype(db: Knex, to: 'double' | 'float'): Promise<void> {
  if (db.client.config.client !== 'pg') return;
  for (const [table, columns] of Object.entries(FLOATS)) {
    await db.schema.alterTable(table, (t) => {
      for (const column of columns) (to === 'double' ? t.double(column) : t.float(column)).alter({ alterNullable: false });
    });
  }
}

export const up = (db: Knex) => retype(db, 'double');
export const down = (db: Knex) => retype(db, 'float');
