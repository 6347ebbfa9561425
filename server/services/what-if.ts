import type { Knex } from 'knex';
import type { Me } from '../../shared/roles';
import { cribariCellIndex, majorTraumaCode, triageRates } from '../../shared/quality';
import type { LevelCounts, Matrix, WhatIfChange, WhatIfPolicyChoice, WhatIfQuery, WhatIfResult } from '../../shared/schemas/quality';
import type { ClinicalInput } from '../../shared/schemas/clinical';
import type { CriteriaSetId } from '../../shared/triage/criteria';
import { evaluate } from '../../shared/triage/evaluate';
import { LEVEL_RANK, validatePolicy, type LevelId, type Policy } from '../../shared/triage/policy';
import { forbidden, invalid, notFound } from '../errors';
import { policyInForce } from './policies';
import { assertQualityReader, periodOf } from './quality-report';
import { localCriteriaRead } from './what-if-local';

// A draft policy tried on the past: the latest revision of every case in the period evaluated
// again under it, beside what the ED decided and what Plumbline recommended at the time.

const STATUS_WORDS: Record<string, string> = { draft: 'draft', approved: 'approved, not yet published', published: 'published', retired: 'retired' };

/** What a what-if can run: the policy in force and every stored version of the hospital's own. */
export async function whatIfPolicies(db: Knex, me: Me, hospitalId: number, at: number): Promise<WhatIfPolicyChoice[]> {
  assertQualityReader(me, hospitalId);
  const live = await policyInForce(db, hospitalId, at);
  const versions = await db('policy_versions').where({ hospital_id: hospitalId }).orderBy('version', 'desc').select('id', 'version', 'status', 'document');
  return [
    { value: 'in-force', label: `In force now: ${live.name}, version ${live.version}${live.example ? ' (shipped example)' : ''}`, status: 'in-force' },
    ...versions.map((v) => ({ value: v.id as number, label: `Version ${v.version}, ${STATUS_WORDS[v.status] ?? v.status}: ${JSON.parse(v.document).name}`, status: v.status })),
  ];
}

async function policyFor(db: Knex, hospitalId: number, choice: WhatIfQuery['policy'], at: number): Promise<{ policy: Policy; status: WhatIfResult['policy']['status'] }> {
  if (choice === 'in-force') return { policy: await policyInForce(db, hospitalId, at), status: 'in-force' };
  const row = await db('policy_versions').where({ id: choice }).first('hospital_id', 'status', 'document');
  if (!row) throw notFound('That policy version');
  if (row.hospital_id !== hospitalId) throw forbidden('That policy version belongs to another hospital.');
  const check = validatePolicy(JSON.parse(row.document));
  if (!check.ok) throw invalid(check.issues.map((i) => ({ field: `policy.${i.field}`, message: `the draft is not a complete policy yet: ${i.message}` })));
  return { policy: check.policy, status: row.status };
}

const emptyLevels = (): LevelCounts => ({ full: 0, limited: 0, consult: 0, none: 0 });
const CHANGE_LIMIT = 500;

/** Cribari cells through shared/quality's one classification. */
class Cells {
  readonly n = new Int32Array(5);
  add(full: boolean, major: number) {
    this.n[cribariCellIndex(full, major)]++;
  }
  matrix(): Matrix {
    return { ...triageRates(this.n[0], this.n[1], this.n[2], this.n[3]), excluded: this.n[4] };
  }
}

export async function runWhatIf(db: Knex, me: Me, query: WhatIfQuery, at: number): Promise<WhatIfResult> {
  assertQualityReader(me, query.hospitalId);
  const started = performance.now();
  const { policy, status } = await policyFor(db, query.hospitalId, query.policy, at);
  const period = periodOf(query.from, query.to, query.timeZone);
  const rows = await db('cases as c')
    .join('case_revisions as r', function () {
      this.on('r.case_id', '=', 'c.id').andOn('r.revision', '=', 'c.current_revision');
    })
    .leftJoin('outcomes as o', 'o.case_id', 'c.id')
    .where('c.hospital_id', query.hospitalId)
    .andWhere('c.created_at', '>=', period.start)
    .andWhere('c.created_at', '<', period.end)
    .andWhereNot('c.state', 'cancelled')
    .orderBy('c.created_at', 'desc')
    .select('c.id', 'c.case_number', 'c.created_at', 'c.recommended_level', 'c.decided_level', 'r.input', 'r.criteria_set', 'o.case_id as outcome', 'o.iss', 'o.nfti_positive');

  const levels = { decided: emptyLevels(), recommended: emptyLevels(), whatIf: emptyLevels() };
  const cells = { decided: new Cells(), recommended: new Cells(), whatIf: new Cells() };
  const changes: WhatIfChange[] = [];
  let withOutcome = 0, changed = 0, raised = 0, lowered = 0;

  for (const row of rows) {
    const input = JSON.parse(row.input) as ClinicalInput;
    const result = evaluate(input, { set: row.criteria_set as CriteriaSetId, policy });
    const recommended = row.recommended_level as LevelId;
    const decided = (row.decided_level as LevelId | null) ?? recommended;
    const whatIf = result.activation;
    levels.decided[decided]++;
    levels.recommended[recommended]++;
    levels.whatIf[whatIf]++;
    const iss = row.iss == null ? null : Number(row.iss);
    const nfti = row.nfti_positive == null ? null : Boolean(row.nfti_positive);
    const major = row.outcome == null ? null : majorTraumaCode(iss, nfti, query.standard);
    if (major !== null) {
      withOutcome++;
      cells.decided.add(decided === 'full', major);
      cells.recommended.add(recommended === 'full', major);
      cells.whatIf.add(whatIf === 'full', major);
    }
    if (whatIf === recommended) continue;
    changed++;
    if (LEVEL_RANK[whatIf] > LEVEL_RANK[recommended]) raised++;
    else lowered++;
    if (changes.length < CHANGE_LIMIT) {
      changes.push({
        id: row.id, caseNumber: row.case_number, createdAt: Number(row.created_at), from: recommended, to: whatIf,
        decidedLevel: row.decided_level ?? null, iss, nftiPositive: nfti, major: major === null || major < 0 ? null : major === 1,
        criteria: result.criteria.filter((c) => c.calls === whatIf).map((c) => c.label),
      });
    }
  }

  return {
    policy: { id: policy.id, version: policy.version, name: policy.name, example: policy.example, status },
    cases: rows.length,
    withOutcome,
    levels,
    matrix: { decided: cells.decided.matrix(), recommended: cells.recommended.matrix(), whatIf: cells.whatIf.matrix() },
    changed, raised, lowered,
    changes,
    limited: changed > changes.length,
    ms: Math.round(performance.now() - started),
    localCriteria: localCriteriaRead(policy),
  };
}
