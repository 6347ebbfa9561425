// Many closed cases at one hospital, written straight into a database before its server starts,
// and the registry file that gives each of them an outcome.
import type { Knex } from 'knex';

/** Inserts `count` closed cases at the hospital; returns their case numbers. */
export async function addClosedCases(db: Knex, hospitalId: number, count: number): Promise<string[]> {
  const agency = await db('agencies').orderBy('id').first('id');
  const user = await db('users').orderBy('id').first('id');
  const at = Date.now() - 30 * 86_400_000;
  const numbers: string[] = [];
  await db.transaction(async (trx) => {
    for (let start = 0; start < count; start += 500) {
      const rows = [];
      for (let i = start; i < Math.min(count, start + 500); i++) {
        const caseNumber = `R26-${String(i).padStart(6, '0')}`;
        numbers.push(caseNumber);
        rows.push({
          case_number: caseNumber, client_id: `closed-${i}`, agency_id: agency.id, hospital_id: hospitalId, created_by: user.id, state: 'closed',
          current_revision: 1, field_risk: 'low', recommended_level: 'consult', decided_level: 'consult', policy_id: 'example-tiered', policy_version: 1,
          created_at: at + i, updated_at: at + i,
        });
      }
      await trx('cases').insert(rows);
    }
  });
  return numbers;
}

/** A registry CSV with one row per case: only the ISS, 9 (a possible ISS: 3² [source: Baker 1974]). */
export function outcomesCsv(caseNumbers: string[]): string {
  return `case_number,iss\n${caseNumbers.map((n) => `${n},9`).join('\n')}\n`;
}
