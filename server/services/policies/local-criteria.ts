import type { Knex } from 'knex';
import type { Me } from '../../../shared/roles';
import type { ClinicalInput } from '../../../shared/schemas/clinical';
import type { LocalPreview, LocalPreviewQuery, SaveDraft } from '../../../shared/schemas/policies';
import { compileCondition, type HeightFact } from '../../../shared/triage/compile-criteria';
import { MET, createFacts, readFacts } from '../../../shared/triage/facts';
import { checkCondition, conditionToWhen, readBack, settleLocalCriterion, type LocalCriterion } from '../../../shared/triage/local-criteria';
import type { Policy, PolicyRule } from '../../../shared/triage/policy';
import { assertHospital } from '../../auth/guards';
import { invalid } from '../../errors';

// A hospital's own criteria on the server: settled into a draft (their `when`, source and id made
// here, never taken from the page), carried into a new draft, and tried on past cases as typed.

const renamed = (rules: readonly PolicyRule[], ids: Map<string, string>): PolicyRule[] =>
  rules.map((rule) => ({ ...rule, criteria: rule.criteria.map((id) => ids.get(id) ?? id) }));

/**
 * The draft's local criteria in their stored form, and its rules naming them by their settled
 * ids. A condition nothing can meet is refused here, naming the part.
 */
export function settleDraftCriteria(edit: SaveDraft, policyId: string, version: number, hospitalName: string): { rules: PolicyRule[]; localCriteria: LocalCriterion[] } {
  const drafts = edit.localCriteria ?? [];
  const issues = drafts.flatMap((c, i) => checkCondition(c.condition, `localCriteria[${i}].condition`).map((issue) => ({ ...issue, message: `${c.label}: ${issue.message}` })));
  if (issues.length) throw invalid(issues);
  const ids = new Map<string, string>();
  const localCriteria = drafts.map((c) => {
    const settled = settleLocalCriterion(c, policyId, version, hospitalName);
    ids.set(c.id, settled.id);
    return settled;
  });
  return { rules: renamed(edit.rules, ids), localCriteria };
}

/** A new draft copied from a version: its local criteria belong to the new version, under new ids. */
export function rekeyLocalCriteria(policy: Policy, policyId: string, version: number, hospitalName: string): Policy {
  if (!policy.localCriteria?.length) return policy;
  const { rules, localCriteria } = settleDraftCriteria(
    { name: policy.name, levels: policy.levels, rules: policy.rules, localCriteria: policy.localCriteria.map(({ id, label, reason, condition }) => ({ id, label, reason, condition })) },
    policyId, version, hospitalName,
  );
  return { ...policy, rules, localCriteria };
}

const EXAMPLES = 3;
/** The most recent cases a preview reads: enough to find examples while the person types [ours]. */
const PREVIEW_CASES = 20_000;

/** The condition read back, with how many of the hospital's recent cases it catches and three of them. */
export async function previewLocalCondition(db: Knex, me: Me, query: LocalPreviewQuery): Promise<LocalPreview> {
  assertHospital(me, query.hospitalId);
  const issues = checkCondition(query.condition);
  if (issues.length) throw invalid(issues);
  const condition = compileCondition(conditionToWhen(query.condition));
  const rows = await db('cases as c')
    .join('case_revisions as r', function () {
      this.on('r.case_id', '=', 'c.id').andOn('r.revision', '=', 'c.current_revision');
    })
    .where('c.hospital_id', query.hospitalId)
    .andWhereNot('c.state', 'cancelled')
    .orderBy('c.created_at', 'desc')
    .limit(PREVIEW_CASES)
    .select('c.id', 'c.case_number', 'c.created_at', 'r.input');
  const facts = createFacts();
  const examples: LocalPreview['examples'] = [];
  let caught = 0;
  for (const row of rows) {
    const f = readFacts(JSON.parse(row.input) as ClinicalInput, facts);
    if (condition.test(f) !== MET) continue;
    caught++;
    if (examples.length >= EXAMPLES) continue;
    const heights: HeightFact[] = [];
    condition.heights?.(f, heights);
    examples.push({ caseId: row.id, caseNumber: row.case_number, createdAt: Number(row.created_at), because: condition.explain(f), ...(heights.length ? { heights } : {}) });
  }
  return { sentence: readBack(query.condition), caught, cases: rows.length, examples };
}
