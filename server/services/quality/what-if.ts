import type { Knex } from 'knex';
import type { Me } from '../../../shared/roles';
import { cribariCellIndex, majorTraumaCode, triageRates } from '../../../shared/quality';
import type { LevelCounts, Matrix, WhatIfChange, WhatIfPolicyChoice, WhatIfQuery, WhatIfResult } from '../../../shared/schemas/quality';
import { activationOf, evaluate } from '../../../shared/triage/evaluate';
import { LEVEL_RANK, validatePolicy, type LevelId, type Policy } from '../../../shared/triage/policy';
import { forbidden, invalid, notFound } from '../../errors';
import { policyInForce } from '../policies/policies';
import { assertQualityReader } from './report';
import { periodOf } from '../../../shared/days';
import { LEVELS, NOT_DECIDED, readPastCases } from './what-if-inputs';
import { localCriteriaRead } from './what-if-local';

// A draft policy tried on the past: the latest revision of every case in the period evaluated
// again under it, beside what the ED decided, what Plumbline recommended at the time and what the
// policy in force now recommends, all over the same cases in one pass. Each case gets only its
// activation under each policy; the cases listed as changed are explained in full.

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
  // The policy in force now, over the same cases in the same pass; none when it is the one tried.
  const live = query.policy === 'in-force' ? null : await policyInForce(db, query.hospitalId, at);
  const liveIsTried = live !== null && live.id === policy.id && live.version === policy.version;
  const period = periodOf(query.from, query.to, query.timeZone);
  const cases = await readPastCases(db, query.hospitalId, period.start, period.end);

  const levels = { decided: emptyLevels(), recommended: emptyLevels(), whatIf: emptyLevels() };
  const cells = { decided: new Cells(), recommended: new Cells(), whatIf: new Cells() };
  const liveLevels = emptyLevels();
  const liveCells = new Cells();
  const changes: Array<Omit<WhatIfChange, 'caseNumber'>> = [];
  let withOutcome = 0, changed = 0, raised = 0, lowered = 0;

  for (let i = 0; i < cases.n; i++) {
    const { input, set } = cases.inputAt(i);
    const recommended = LEVELS[cases.recommended[i]];
    const decidedLevel = cases.decided[i] === NOT_DECIDED ? null : LEVELS[cases.decided[i]];
    const decided = decidedLevel ?? recommended;
    const whatIf = activationOf(input, { set, policy });
    const now = live === null ? null : liveIsTried ? whatIf : activationOf(input, { set, policy: live });
    levels.decided[decided]++;
    levels.recommended[recommended]++;
    levels.whatIf[whatIf]++;
    if (now !== null) liveLevels[now]++;
    const iss = cases.iss[i] < 0 ? null : cases.iss[i];
    const nfti = cases.nfti[i] < 0 ? null : cases.nfti[i] === 1;
    const major = cases.hasOutcome[i] ? majorTraumaCode(iss, nfti, query.standard) : null;
    if (major !== null) {
      withOutcome++;
      cells.decided.add(decided === 'full', major);
      cells.recommended.add(recommended === 'full', major);
      cells.whatIf.add(whatIf === 'full', major);
      if (now !== null) liveCells.add(now === 'full', major);
    }
    if (whatIf === recommended) continue;
    changed++;
    if (LEVEL_RANK[whatIf] > LEVEL_RANK[recommended]) raised++;
    else lowered++;
    if (changes.length < CHANGE_LIMIT) {
      changes.push({
        id: cases.id[i], createdAt: cases.createdAt[i], from: recommended, to: whatIf, inForce: now,
        decidedLevel, iss, nftiPositive: nfti, major: major === null || major < 0 ? null : major === 1,
        // Explained only here, for the cases listed (the input is still this case's).
        criteria: evaluate(input, { set, policy }).criteria.filter((c) => c.calls === whatIf).map((c) => c.label),
      });
    }
  }
  // Case numbers only for the cases listed.
  const numbers = new Map<number, string>();
  if (changes.length) {
    for (const row of await db('cases').whereIn('id', changes.map((c) => c.id)).select('id', 'case_number')) numbers.set(row.id, row.case_number);
  }

  return {
    policy: { id: policy.id, version: policy.version, name: policy.name, example: policy.example, status },
    cases: cases.n,
    withOutcome,
    levels,
    matrix: { decided: cells.decided.matrix(), recommended: cells.recommended.matrix(), whatIf: cells.whatIf.matrix() },
    inForce: live === null ? null : {
      policy: { id: live.id, version: live.version, name: live.name, example: live.example, status: 'in-force' },
      levels: liveLevels,
      matrix: liveCells.matrix(),
    },
    changed, raised, lowered,
    changes: changes.map((c) => ({ ...c, caseNumber: numbers.get(c.id) ?? '' })),
    limited: changed > changes.length,
    ms: Math.round(performance.now() - started),
    localCriteria: localCriteriaRead(policy),
  };
}
