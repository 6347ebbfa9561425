import type { ClinicalInput } from '../schemas/clinical';
import { fallImpact, type Impact } from '../physics/impact';
import { CRITERIA_SETS, DEFAULT_SET, compiledCriterion } from './catalog';
import * as compiled from './compile-criteria';
import type { CompiledCriterion } from './compile-criteria';
import type { CriteriaSetId, CriterionSetId, NemsisCode, RiskTier } from './criteria';
import { TRI, createFacts, readFacts } from './facts';
import { MISSING_INPUTS, type MissingInput } from './missing-inputs';
import { EXAMPLE_POLICY, type LevelId, type Policy } from './policy';

export type FieldRisk = RiskTier | 'none';

export interface FiredCriterion {
  id: string;
  set: CriterionSetId;
  /** The guideline's risk block; null for a policy-catalog condition. */
  tier: RiskTier | null;
  label: string;
  /** The recorded values that met it: "SBP 84 < 90, age 34 (10–64)". */
  because: string;
  source: string;
  /** The level the policy's first rule naming this criterion calls; null when the policy does not name it. */
  calls: LevelId | null;
  nemsis: NemsisCode | null;
}

export interface Evaluation {
  set: CriteriaSetId;
  fieldRisk: FieldRisk;
  activation: LevelId;
  /** The policy's display name for the level. */
  activationName: string;
  /** Met criteria of the chosen set, then met criteria the policy names from elsewhere. */
  criteria: FiredCriterion[];
  /**
   * Unknown inputs that could raise the result: each belongs to a criterion left unknown whose
   * tier is above the current fieldRisk, or that a rule above the matching one names. An unknown
   * that could only add reasons at the level already reached is not listed.
   */
  missing: MissingInput[];
  impact: Impact;
  policy: { id: string; version: number; example: boolean };
}

export interface EvaluateOptions {
  set?: CriteriaSetId;
  /** Any policy, a draft included: a what-if is this call over past inputs. Treat it as immutable. */
  policy?: Policy;
}

interface Plan {
  members: CompiledCriterion[];
  tests: CompiledCriterion['test'][];
  /** Per member, INLINE_* and its bit or flag index: findings, considerations and flags need no call. */
  inlineKind: Uint8Array;
  inlineArg: Int32Array;
  tierRank: Int8Array;
  setCount: number;
  calls: (LevelId | null)[];
  /** Per member, the index of the first rule naming it; rules.length when none does. */
  firstRule: Int32Array;
  ruleLevel: LevelId[];
  levelName: Record<LevelId, string>;
  policyRef: Evaluation['policy'];
  /** Scratch: the members met and the members unknown in one evaluation, in member order. */
  met: Int32Array;
  unknown: Int32Array;
}

// Compiled once per policy object and set; a policy edited in place would keep its old plan.
const plans = new WeakMap<Policy, Partial<Record<CriteriaSetId, Plan>>>();

function buildPlan(setId: CriteriaSetId, policy: Policy): Plan {
  const set = CRITERIA_SETS[setId];
  if (!set) throw new Error(`unknown criteria set ${setId}`);
  const members: CompiledCriterion[] = set.criteria.map((c) => compiledCriterion(c.id)!);
  const position = new Map(members.map((m, i) => [m.criterion.id, i]));
  const setCount = members.length;
  const ruleMembers = policy.rules.map((rule) =>
    Int32Array.from(rule.criteria, (id) => {
      let i = position.get(id);
      if (i === undefined) {
        const compiled = compiledCriterion(id);
        if (!compiled) throw new Error(`policy ${policy.id} version ${policy.version}: unknown criterion id ${id}`);
        i = members.push(compiled) - 1;
        position.set(id, i);
      }
      return i;
    }),
  );
  const firstRule = new Int32Array(members.length).fill(policy.rules.length);
  const calls: (LevelId | null)[] = members.map(() => null);
  for (let r = ruleMembers.length - 1; r >= 0; r--) {
    for (const i of ruleMembers[r]) {
      firstRule[i] = r;
      calls[i] = policy.rules[r].level;
    }
  }
  const levelName = { full: 'full', limited: 'limited', consult: 'consult', none: 'none' } as Record<LevelId, string>;
  for (const level of policy.levels) levelName[level.id] = level.name;
  return {
    members, setCount, calls, firstRule,
    tests: members.map((m) => m.test),
    inlineKind: Uint8Array.from(members, (m) => m.inline?.kind ?? compiled.INLINE_NONE),
    inlineArg: Int32Array.from(members, (m) => m.inline?.arg ?? 0),
    tierRank: Int8Array.from(members, (m) => m.tierRank),
    ruleLevel: policy.rules.map((r) => r.level),
    levelName,
    policyRef: Object.freeze({ id: policy.id, version: policy.version, example: policy.example }),
    met: new Int32Array(members.length),
    unknown: new Int32Array(members.length),
  };
}

let lastPolicy: Policy | null = null;
let lastSet: CriteriaSetId | null = null;
let lastPlan: Plan | null = null;

function planFor(setId: CriteriaSetId, policy: Policy): Plan {
  if (policy === lastPolicy && setId === lastSet) return lastPlan!;
  let bySet = plans.get(policy);
  if (!bySet) plans.set(policy, (bySet = {}));
  lastPolicy = policy;
  lastSet = setId;
  return (lastPlan = bySet[setId] ??= buildPlan(setId, policy));
}

// Module-local copies of imported bindings used per evaluation (see compile-criteria.ts).
const { MET, NOT_MET, UNKNOWN } = TRI;
const { INLINE_NONE, INLINE_FINDING, INLINE_CONSIDERATION } = compiled;
const MISSING = MISSING_INPUTS;
const read = readFacts;
const impactOf = fallImpact;
const defaultSet = DEFAULT_SET;
const defaultPolicy = EXAMPLE_POLICY;
const facts = createFacts();
const RISK: readonly FieldRisk[] = ['none', 'moderate', 'high'];

/** The input is trusted to have passed ClinicalInput; parse at the boundary, not here. */
export function evaluate(input: ClinicalInput, options: EvaluateOptions = {}): Evaluation {
  const set = options.set ?? defaultSet;
  const plan = planFor(set, options.policy ?? defaultPolicy);
  const f = read(input, facts);
  const { members, tests, inlineKind, inlineArg, tierRank, setCount, firstRule, calls, met, unknown } = plan;
  const findings = f.findings, considerations = f.considerations, flags = f.flags;
  const n = members.length;

  // One pass over the criteria: the field risk, the first rule with a met member (the lowest
  // firstRule among them) and the met and unknown members for the two lists below.
  let risk = 0;
  let matched = plan.ruleLevel.length;
  let metCount = 0, unknownCount = 0;
  for (let i = 0; i < n; i++) {
    const kind = inlineKind[i];
    const s =
      kind === INLINE_NONE ? tests[i](f)
      : kind === INLINE_FINDING ? ((findings & inlineArg[i]) !== 0 ? MET : NOT_MET)
      : kind === INLINE_CONSIDERATION ? ((considerations & inlineArg[i]) !== 0 ? MET : NOT_MET)
      : flags[inlineArg[i]];
    if (s === MET) {
      if (i < setCount && tierRank[i] > risk) risk = tierRank[i];
      if (firstRule[i] < matched) matched = firstRule[i];
      met[metCount++] = i;
    } else if (s === UNKNOWN) {
      unknown[unknownCount++] = i;
    }
  }
  const activation: LevelId = matched < plan.ruleLevel.length ? plan.ruleLevel[matched] : 'none';

  const criteria: FiredCriterion[] = [];
  for (let k = 0; k < metCount; k++) {
    const i = met[k];
    if (i >= setCount && calls[i] === null) continue;
    const m = members[i];
    const c = m.criterion;
    criteria.push({
      id: c.id, set: c.set, tier: c.tier, label: c.label, because: m.explain(f), source: c.source, calls: calls[i], nemsis: c.nemsis,
    });
  }
  let missingBits = 0;
  for (let k = 0; k < unknownCount; k++) {
    const i = unknown[k];
    if ((i < setCount && tierRank[i] > risk) || firstRule[i] < matched) missingBits |= members[i].missing(f);
  }
  const missing: MissingInput[] = [];
  for (let b = 0; missingBits !== 0; b++, missingBits >>>= 1) if (missingBits & 1) missing.push(MISSING[b]);

  return {
    set,
    fieldRisk: RISK[risk],
    activation,
    activationName: plan.levelName[activation],
    criteria,
    missing,
    impact: impactOf(input.fall.heightM, input.fall.surface, input.weightKg),
    policy: plan.policyRef,
  };
}
