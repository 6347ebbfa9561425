import type { Knex } from 'knex';
import { appendAudit, type Actor } from '../audit/audit';

// Settings are JSON values per hospital, with hospital 0 holding the product-wide default and
// the code's defaults below as the last word. Any feature may add its keys here.

export const PRODUCT_WIDE = 0;

export const SETTING_DEFAULTS: Record<string, unknown> = {
  // Attending at the bedside within 15 minutes of arrival for the highest level [source: Ingraham A et al.].
  'response.targetMinutes': 15,
  // Share of highest-level activations that should meet it [memory: trauma-centre standard, SOURCES.md §5].
  'response.compliance': 0.8,
  // The zone a hospital's pages and notices give their times in; the server's own until set.
  'hospital.timeZone': Intl.DateTimeFormat().resolvedOptions().timeZone || 'UTC',
  // Escalation steps after the first (which is the hospital's escalation minutes, to its
  // escalation list): each a multiple of those minutes and a list [ours].
  'escalation.laterSteps': [{ times: 2, list: 'senior' }],
};

/** The hospital's own value, else the product-wide one, else the code's default (or `fallback`). */
export async function getSetting<T>(db: Knex, key: string, hospitalId: number = PRODUCT_WIDE, fallback?: T): Promise<T> {
  const rows = await db('settings').where({ key }).whereIn('hospital_id', [hospitalId, PRODUCT_WIDE]).select('hospital_id', 'value');
  const own = rows.find((r) => r.hospital_id === hospitalId) ?? rows.find((r) => r.hospital_id === PRODUCT_WIDE);
  if (own) return JSON.parse(own.value) as T;
  return (fallback !== undefined ? fallback : SETTING_DEFAULTS[key]) as T;
}

/** Several keys at once for one hospital, with the same fallbacks as getSetting. */
export async function getSettings<T extends Record<string, unknown>>(db: Knex, keys: Array<keyof T & string>, hospitalId: number = PRODUCT_WIDE): Promise<T> {
  const out: Record<string, unknown> = {};
  for (const key of keys) out[key] = await getSetting(db, key, hospitalId);
  return out as T;
}

/**
 * Stores a value; with an actor the change is audited in the same transaction as the write.
 * Call it inside the caller's transaction when it is part of a larger change.
 */
export async function setSetting(db: Knex, key: string, value: unknown, hospitalId: number = PRODUCT_WIDE, audit?: { actor: Actor; at: number }): Promise<void> {
  const write = async (trx: Knex) => {
    const before = await trx('settings').where({ hospital_id: hospitalId, key }).first('value');
    await trx('settings').insert({ hospital_id: hospitalId, key, value: JSON.stringify(value) }).onConflict(['hospital_id', 'key']).merge();
    if (audit) {
      await appendAudit(trx, {
        at: audit.at,
        actor: audit.actor,
        action: 'setting.changed',
        entity: 'setting',
        entityId: `${hospitalId}:${key}`,
        before: before ? { key, hospitalId, value: JSON.parse(before.value) } : null,
        after: { key, hospitalId, value },
      });
    }
  };
  if (db.isTransaction) await write(db);
  else await db.transaction(write);
}
