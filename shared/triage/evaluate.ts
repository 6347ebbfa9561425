import type { ClinicalInput } from '../schemas/clinical';
import { fallImpact, type Impact } from '../physics/impact';
import { CRITERIA_SETS, DEFAULT_SET, compiledCriterion } from './catalog';
import { compileCriterion, type CompiledCriterion, type HeightFact } from './compile-criteria';
import type { CriteriaSet, CriteriaSetId, Criterion, CriterionSetId, NemsisCode, RiskTier } from './criteria';
import { TRI, createFacts, readFacts } from './facts';
import { MISSING_INPUTS, type MissingInput } from './missing-inputs';
import { EXAMPLE_POLICY, type LevelId, type Policy } from './policy';

export type FieldRisk = RiskTier | 'none';
export type { HeightFact };

export interface FiredCriterion {
  id: string;
  set: CriterionSetId;
  /** The guideline's risk block; null for a policy-catalog condition. */
  tier: RiskTier | null;
  label: string;
  /** The recorded values that met it: "SBP 84 < 90, age 34 (10–64)". */
  because: string;
  /**
   * The fall heights `because` states, as numbers, for screens that show them in their own unit;
   * present only when it states one (and absent from results stored before it was added).
   */
  heights?: HeightFact[];
  source: string;
  /** The source in plain words for screens; absent from results stored before it was added. */
  sourceLabel?: string;
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
  /**
   * Criteria given as data instead of a shipped set (a shipped set with a hospital's own criteria
   * appended, say); evaluated the same way, each criterion's source carried to its explanation.
   */
  criteria?: CriteriaSet;
  /** Any policy, a draft included: a what-if is this call over past inputs. Treat it as immutable. */
  policy?: Policy;
}

interface Plan {
  members: CompiledCriterion[];
  /**
   * Per member, the fixed fields of its FiredCriterion in one object layout: the criteria of the
   * sets and the policy catalog are built in different ways, so their own objects differ in layout
   * and reading them would be a slow lookup per field.
   */
  about: Omit<FiredCriterion, 'because' | 'heights'>[];
  tierRank: Int8Array;
  setCount: number;
  /** Per member, the index of the first rule naming it; rules.length when none does. */
  firstRule: Int32Array;
  ruleLevel: LevelId[];
  /** The policy's display name of each rule's level, then of none. */
  ruleName: string[];
  policyRef: Evaluation['policy'];
  /** Scratch for one evaluation: the members met, the members unknown and their missing inputs. */
  met: Int32Array;
  unknown: Int32Array;
  unknownMissing: Int32Array;
}

// Compiled once per policy object and criteria set; a policy or set edited in place would keep its old plan.
const plans = new WeakMap<Policy, WeakMap<CriteriaSet, Plan>>();
// Criteria given as data (a hospital's own, or a set built by a caller) are compiled once per object.
const compiledData = new WeakMap<Criterion, CompiledCriterion>();

function compiledOf(c: Criterion): CompiledCriterion {
  const shipped = compiledCriterion(c.id);
  if (shipped && shipped.criterion === c) return shipped;
  let own = compiledData.get(c);
  if (!own) compiledData.set(c, (own = compileCriterion(c)));
  return own;
}

function buildPlan(set: CriteriaSet, policy: Policy): Plan {
  const members: CompiledCriterion[] = set.criteria.map(compiledOf);
  const position = new Map(members.map((m, i) => [m.criterion.id, i]));
  if (position.size !== members.length) throw new Error(`criteria set ${set.id}: criterion ids must be unique`);
  const setCount = members.length;
  const ruleMembers = policy.rules.map((rule) =>
    Int32Array.from(rule.criteria, (id) => {
      let i = position.get(id);
      if (i === undefined) {
        const found = compiledCriterion(id);
        if (!found) throw new Error(`policy ${policy.id} version ${policy.version}: unknown criterion id ${id}`);
        i = members.push(found) - 1;
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
    members, setCount, firstRule,
    about: members.map(({ criterion: c }, i) => ({
      id: c.id, set: c.set, tier: c.tier, label: c.label, source: c.source,
      sourceLabel: c.sourceLabel ?? c.source, calls: calls[i], nemsis: c.nemsis,
    })),
    tierRank: Int8Array.from(members, (m) => m.tierRank),
    ruleLevel: policy.rules.map((r) => r.level),
    ruleName: [...policy.rules.map((r) => levelName[r.level]), levelName.none],
    policyRef: Object.freeze({ id: policy.id, version: policy.version, example: policy.example }),
    met: new Int32Array(members.length),
    unknown: new Int32Array(members.length),
    unknownMissing: new Int32Array(members.length),
  };
}

let lastPolicy: Policy | null = null;
let lastSet: CriteriaSet | null = null;
let lastPlan: Plan | null = null;

function planFor(set: CriteriaSet, policy: Policy): Plan {
  if (policy === lastPolicy && set === lastSet) return lastPlan!;
  let bySet = plans.get(policy);
  if (!bySet) plans.set(policy, (bySet = new WeakMap()));
  let plan = bySet.get(set);
  if (!plan) bySet.set(set, (plan = buildPlan(set, policy)));
  lastPolicy = policy;
  lastSet = set;
  return (lastPlan = plan);
}

// Module-local copies of imported bindings used per evaluation (see compile-criteria.ts).
const { MET, UNKNOWN } = TRI;
const MISSING = MISSING_INPUTS;
const read = readFacts;
const impactOf = fallImpact;
const defaultSet = DEFAULT_SET;
const defaultPolicy = EXAMPLE_POLICY;
const facts = createFacts();
const RISK: readonly FieldRisk[] = ['none', 'moderate', 'high'];

function setOf(options: EvaluateOptions): CriteriaSet {
  if (options.criteria) return options.criteria;
  const id = options.set ?? defaultSet;
  const set = CRITERIA_SETS[id];
  if (!set) throw new Error(`unknown criteria set ${id}`);
  return set;
}

/** The input is trusted to have passed ClinicalInput; parse at the boundary, not here. */
export function evaluate(input: ClinicalInput, options: EvaluateOptions = {}): Evaluation {
  const set = setOf(options);
  const plan = planFor(set, options.policy ?? defaultPolicy);
  const f = read(input, facts);
  const { members, about, tierRank, setCount, firstRule, met, unknown, unknownMissing } = plan;

  // One pass over the members, in order: the field risk (the set's own members only), the first
  // rule with a met member (the lowest firstRule among them), the met and the unknown members.
  let risk = 0, matched = plan.ruleLevel.length, metCount = 0, unknownCount = 0;
  for (let i = 0; i < members.length; i++) {
    const m = members[i];
    const s = m.test(f);
    if (s === MET) {
      if (i < setCount && tierRank[i] > risk) risk = tierRank[i];
      if (firstRule[i] < matched) matched = firstRule[i];
      met[metCount++] = i;
    } else if (s === UNKNOWN) {
      unknownMissing[unknownCount] = m.missing(f);
      unknown[unknownCount++] = i;
    }
  }
  const activation: LevelId = matched < plan.ruleLevel.length ? plan.ruleLevel[matched] : 'none';

  const criteria: FiredCriterion[] = [];
  // Members past the set's own are there because a rule names them, so every met member is reported.
  for (let k = 0; k < metCount; k++) {
    const i = met[k];
    const c = about[i];
    const m = members[i];
    const fired: FiredCriterion = {
      id: c.id, set: c.set, tier: c.tier, label: c.label, because: m.explain(f),
      source: c.source, sourceLabel: c.sourceLabel, calls: c.calls, nemsis: c.nemsis,
    };
    if (m.heights !== null) {
      const heights: HeightFact[] = [];
      m.heights(f, heights);
      if (heights.length) fired.heights = heights;
    }
    criteria.push(fired);
  }
  let missingBits = 0;
  for (let k = 0; k < unknownCount; k++) {
    const i = unknown[k];
    if ((i < setCount && tierRank[i] > risk) || firstRule[i] < matched) missingBits |= unknownMissing[k];
  }
  const missing: MissingInput[] = [];
  // Lowest bit first, which is MISSING_INPUTS order.
  while (missingBits !== 0) {
    const low = missingBits & -missingBits;
    missing.push(MISSING[31 - Math.clz32(low)]);
    missingBits ^= low;
  }

  return {
    set: set.id,
    fieldRisk: RISK[risk],
    activation,
    activationName: plan.ruleName[matched],
    criteria,
    missing,
    impact: impactOf(input.fall.heightM, input.fall.surface, input.weightKg),
    policy: plan.policyRef,
  };
}

/**
 * The activation `evaluate` gives, without its explanations, missing inputs or impact: for a
 * policy run over many past cases (the what-if), which explains only the cases it lists. Only the
 * members a rule names are tested, and only while they could still reach an earlier rule.
 */
export function activationOf(input: ClinicalInput, options: EvaluateOptions = {}): LevelId {
  const plan = planFor(setOf(options), options.policy ?? defaultPolicy);
  const f = read(input, facts);
  const { members, firstRule } = plan;
  let matched = plan.ruleLevel.length;
  for (let i = 0; i < members.length; i++) {
    if (firstRule[i] < matched && members[i].test(f) === MET) matched = firstRule[i];
  }
  return matched < plan.ruleLevel.length ? plan.ruleLevel[matched] : 'none';
}
