import type { Knex } from 'knex';
import { evaluationInputRow } from '../server/services/cases/evaluation-input';
import type { ClinicalInput } from '../shared/schemas/clinical';
import type { CriteriaSetId } from '../shared/triage/criteria';

// Every existing case's latest input, copied into case_evaluation_inputs in the product's own
// layout (a later change of that layout comes with its own migration rewriting the rows).
const CHUNK = 500;

export async function up(db: Knex): Promise<void> {
  let after = 0;
  for (;;) {
    const rows = await db('cases as c')
      .join('case_revisions as r', function () {
        this.on('r.case_id', '=', 'c.id').andOn('r.revision', '=', 'c.current_revision');
      })
      .where('c.id', '>', after)
      .orderBy('c.id')
      .limit(CHUNK)
      .select('c.id', 'r.revision', 'r.criteria_set', 'r.input');
    if (!rows.length) break;
    after = rows[rows.length - 1].id;
    await db('case_evaluation_inputs').insert(rows.map((row) => evaluationInputRow(row.id, row.revision, row.criteria_set as CriteriaSetId, JSON.parse(row.input) as ClinicalInput)));
  }
}

export async function down(db: Knex): Promise<void> {
  await db('case_evaluation_inputs').delete();
}
