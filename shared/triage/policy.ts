import { z } from 'zod';
import { describeIssues, type FieldIssue } from '../schemas/issues';
import { safeText } from '../schemas/text';
import { findCriterion } from './catalog';
import { FIELD_2021 } from './field-2021';
import { LocalCriterion, checkLocalCriterion, registerLocalCriterion } from './local-criteria';

// An activation policy is data a hospital owns: levels with its own display names, and rules
// "this level is called by any of these criterion ids", read from the top; the first rule with a
// met criterion gives the level, `none` otherwise. The rules name criteria by id, so a policy
// gives the same level whichever guideline set is chosen for fieldRisk.

export const LEVEL_IDS = ['full', 'limited', 'consult', 'none'] as const;
export type LevelId = (typeof LEVEL_IDS)[number];
export const LEVEL_RANK: Readonly<Record<LevelId, number>> = { full: 3, limited: 2, consult: 1, none: 0 };
/** Each level's words where no policy names it otherwise (a policy version may rename its levels). */
export const LEVEL_WORDS: Readonly<Record<LevelId, string>> = { full: 'Full trauma team', limited: 'Limited trauma team', consult: 'Trauma consult', none: 'No activation' };

const text = (max: number) => safeText({ max });
const levelId = z.enum(LEVEL_IDS, { error: `must be one of: ${LEVEL_IDS.join(', ')}` });

export const PolicyLevel = z.object({ id: levelId, name: text(60) });
export type PolicyLevel = z.infer<typeof PolicyLevel>;

export const PolicyRule = z.object({
  level: levelId,
  criteria: z.array(text(100), { error: 'must be a list of criterion ids' }).min(1, { error: 'must name at least one criterion' }),
  note: z.string().max(500).optional(),
});
export type PolicyRule = z.infer<typeof PolicyRule>;

export const Policy = z.object({
  id: z.string({ error: 'must be text' }).regex(/^[a-z0-9]+(?:-[a-z0-9]+)*$/, { error: 'must be lower-case words joined by hyphens' }).max(64),
  version: z.number({ error: 'must be a number' }).int({ error: 'must be a whole number' }).min(1, { error: 'must be at least 1' }),
  name: text(200),
  /** True for the shipped example: it needs local review and approval before use. */
  example: z.boolean({ error: 'must be true or false' }),
  approvedBy: z.string().max(200).nullable().optional(),
  effectiveFrom: z.iso.date({ error: 'must be a date (YYYY-MM-DD)' }).nullable().optional(),
  note: z.string().max(2000).optional(),
  levels: z.array(PolicyLevel, { error: 'must be a list' }).min(1, { error: 'must list at least the level none' }),
  rules: z.array(PolicyRule, { error: 'must be a list' }),
  /** The hospital's own criteria (local-criteria.ts); rules name them by id like any other. */
  localCriteria: z.array(LocalCriterion, { error: 'must be a list' }).max(50, { error: 'must hold at most 50 criteria' }).optional(),
});
export type Policy = z.infer<typeof Policy>;

const ids = (tier: 'high' | 'moderate', except: readonly string[] = []) =>
  FIELD_2021.criteria.filter((c) => c.tier === tier && !except.includes(c.id)).map((c) => c.id);

const FULL_CRITERIA = [
  'policy:sbp-below-90-age-10-up',
  'field-2021:sbp-low-age-0-9',
  'policy:gcs-total-below-9',
  'field-2021:respiratory-distress-or-support',
  'policy:receiving-blood',
  'field-2021:penetrating-injury',
];

/** SOURCES.md §6 [ours]: an example for each hospital to review, not a recommendation. */
export const EXAMPLE_POLICY: Policy = Object.freeze({
  id: 'example-tiered',
  version: 1,
  name: 'Example tiered activation policy',
  example: true,
  approvedBy: null,
  effectiveFrom: null,
  note: 'Shipped as an example. It must be reviewed and approved locally; local policy and medical direction prevail.',
  levels: LEVEL_IDS.map((id) => ({ id, name: LEVEL_WORDS[id] })),
  rules: [
    { level: 'full', criteria: FULL_CRITERIA, note: 'ACS minimum criteria for the highest activation, as far as a pre-alert can show them.' },
    { level: 'limited', criteria: [...ids('high', FULL_CRITERIA), 'policy:fall-above-20-ft'], note: 'Any other 2021 high-risk criterion, or a fall over 20 ft.' },
    { level: 'consult', criteria: ids('moderate'), note: 'Any 2021 moderate-risk criterion.' },
  ],
}) as Policy;

export const BUILT_IN_POLICIES: ReadonlyMap<string, Policy> = new Map([[EXAMPLE_POLICY.id, EXAMPLE_POLICY]]);

export type PolicyCheck = { ok: true; policy: Policy } | { ok: false; issues: FieldIssue[] };

/**
 * Shape, then meaning: known criterion ids, levels declared once with `none` as the fallback,
 * rules ordered from the highest level down (so a new finding can never lower the level), and
 * no declared level that no rule can reach.
 */
export function validatePolicy(raw: unknown): PolicyCheck {
  const parsed = Policy.safeParse(raw);
  if (!parsed.success) return { ok: false, issues: describeIssues(parsed.error) };
  const policy = parsed.data;
  const issues: FieldIssue[] = [];

  // The hospital's own criteria first: a rule may name them only once they are known to be sound.
  const local = new Set<string>();
  (policy.localCriteria ?? []).forEach((c, i) => {
    const found = checkLocalCriterion(c, policy.id, policy.version, `localCriteria[${i}]`);
    if (local.has(c.id)) found.push({ field: `localCriteria[${i}]`, message: `${c.label} is listed twice` });
    if (found.length) return void issues.push(...found);
    local.add(c.id);
    registerLocalCriterion(c);
    if (!policy.rules.some((rule) => rule.criteria.includes(c.id))) {
      issues.push({ field: `localCriteria[${i}]`, message: `${c.label} calls no level: choose the level it calls` });
    }
  });

  const declared = new Set<LevelId>();
  policy.levels.forEach((level, i) => {
    if (declared.has(level.id)) issues.push({ field: `levels[${i}].id`, message: `level ${level.id} is listed twice` });
    declared.add(level.id);
  });
  if (!declared.has('none')) issues.push({ field: 'levels', message: 'must list the level none, the result when no rule matches' });

  const caught = new Set<string>();
  const reachable = new Set<LevelId>(['none']);
  let previousRank = Infinity;
  policy.rules.forEach((rule, r) => {
    if (rule.level === 'none') {
      issues.push({ field: `rules[${r}].level`, message: 'none is the result when no rule matches; it takes no rule' });
    } else if (!declared.has(rule.level)) {
      issues.push({ field: `rules[${r}].level`, message: `level ${rule.level} is not among this policy's levels` });
    }
    const rank = LEVEL_RANK[rule.level];
    if (rank > previousRank) {
      issues.push({
        field: `rules[${r}].level`,
        message: `level ${rule.level} comes after a lower level; the first match from the top wins, so order rules from full down`,
      });
    }
    previousRank = Math.min(previousRank, rank);
    let wins = false;
    rule.criteria.forEach((id, c) => {
      if (id.startsWith('local:') && !local.has(id)) issues.push({ field: `rules[${r}].criteria[${c}]`, message: `${id} is not one of this version's own criteria` });
      else if (!findCriterion(id)) issues.push({ field: `rules[${r}].criteria[${c}]`, message: `unknown criterion id ${id}` });
      else if (!caught.has(id)) wins = true;
    });
    if (wins) reachable.add(rule.level);
    for (const id of rule.criteria) caught.add(id);
  });

  policy.levels.forEach((level, i) => {
    if (reachable.has(level.id)) return;
    const called = policy.rules.some((rule) => rule.level === level.id);
    issues.push({
      field: `levels[${i}]`,
      message: called
        ? `level ${level.id} is unreachable: every criterion of its rules is caught by a rule above`
        : `level ${level.id} is unreachable: no rule calls it`,
    });
  });

  return issues.length ? { ok: false, issues } : { ok: true, policy };
}
