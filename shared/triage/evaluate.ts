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
  /**
   * Per member, the fixed fields of its FiredCriterion in one object layout: the criteria of the
   * sets and the policy catalog are built in different ways, so their own objects differ in layout
   * and reading them would be a slow lookup per field.
   */
  about: Omit<FiredCriterion, 'because'>[];
  tests: CompiledCriterion['test'][];
  /**
   * The members' shapes as columns (see compile-criteria.ts), for the members `loop` lists: those
   * other than findings and considerations, which are tested only when the input has any.
   */
  op: Uint8Array;
  a: Int32Array;
  b: Int32Array;
  c: Int32Array;
  t: Float64Array;
  t2: Float64Array;
  perYear: Float64Array;
  from: Float64Array;
  below: Float64Array;
  loop: Int32Array;
  findingMembers: Int32Array;
  considerationMembers: Int32Array;
  tierRank: Int8Array;
  setCount: number;
  calls: (LevelId | null)[];
  /** Per member, the index of the first rule naming it; rules.length when none does. */
  firstRule: Int32Array;
  ruleLevel: LevelId[];
  levelName: Record<LevelId, string>;
  policyRef: Evaluation['policy'];
  /** Scratch: the members met and the members unknown in one evaluation. */
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
  const indices = members.map((_, i) => i);
  const withOp = (op: number) => Int32Array.from(indices.filter((i) => members[i].shape.op === op));
  return {
    members, setCount, calls, firstRule,
    about: members.map(({ criterion: c }, i) => ({
      id: c.id, set: c.set, tier: c.tier, label: c.label, source: c.source, calls: calls[i], nemsis: c.nemsis,
    })),
    tests: members.map((m) => m.test),
    op: Uint8Array.from(members, (m) => m.shape.op),
    a: Int32Array.from(members, (m) => m.shape.a),
    b: Int32Array.from(members, (m) => m.shape.b),
    c: Int32Array.from(members, (m) => m.shape.c),
    t: Float64Array.from(members, (m) => m.shape.t),
    t2: Float64Array.from(members, (m) => m.shape.t2),
    perYear: Float64Array.from(members, (m) => m.shape.perYear),
    from: Float64Array.from(members, (m) => m.shape.from),
    below: Float64Array.from(members, (m) => m.shape.below),
    loop: Int32Array.from(indices.filter((i) => members[i].shape.op !== compiled.OP_FINDING && members[i].shape.op !== compiled.OP_CONSIDERATION)),
    findingMembers: withOp(compiled.OP_FINDING),
    considerationMembers: withOp(compiled.OP_CONSIDERATION),
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
const { OP_FLAG, OP_BELOW, OP_ABOVE, OP_AT_MOST, OP_EXCEEDS, OP_OUTSIDE, OP_ANY_FLAG } = compiled;
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
  const { members, about, tests, op, a, b, c, t, t2, perYear, from, below, loop, tierRank, setCount, firstRule, calls, met, unknown } = plan;
  const lo = f.lo, hi = f.hi, years = f.years, flags = f.flags;

  // One pass over the criteria: the field risk, the first rule with a met member (the lowest
  // firstRule among them) and the met and unknown members for the two lists below.
  let risk = 0;
  let matched = plan.ruleLevel.length;
  let metCount = 0, unknownCount = 0;
  for (let k = 0; k < loop.length; k++) {
    const i = loop[k];
    let s: number;
    switch (op[i]) {
      case OP_FLAG:
        s = flags[a[i]];
        break;
      case OP_BELOW: {
        if (years < from[i] || years >= below[i]) { s = NOT_MET; break; }
        const q = a[i], threshold = t[i] + perYear[i] * years;
        s = hi[q] < threshold ? MET : lo[q] >= threshold ? NOT_MET : UNKNOWN;
        break;
      }
      case OP_ABOVE: {
        if (years < from[i] || years >= below[i]) { s = NOT_MET; break; }
        const q = a[i];
        s = lo[q] > t[i] ? MET : hi[q] <= t[i] ? NOT_MET : UNKNOWN;
        break;
      }
      case OP_AT_MOST: {
        if (years < from[i] || years >= below[i]) { s = NOT_MET; break; }
        const q = a[i];
        s = hi[q] <= t[i] ? MET : lo[q] > t[i] ? NOT_MET : UNKNOWN;
        break;
      }
      case OP_EXCEEDS: {
        if (years < from[i] || years >= below[i]) { s = NOT_MET; break; }
        const x = a[i], y = b[i];
        s = lo[x] > hi[y] ? MET : hi[x] <= lo[y] ? NOT_MET : UNKNOWN;
        break;
      }
      case OP_OUTSIDE: {
        const q = a[i];
        s = hi[q] < t[i] || lo[q] > t2[i] ? MET : lo[q] >= t[i] && hi[q] <= t2[i] ? NOT_MET : UNKNOWN;
        break;
      }
      case OP_ANY_FLAG: {
        const x = flags[a[i]], y = flags[b[i]], z = flags[c[i]];
        s = x === MET || y === MET || z === MET ? MET : x === UNKNOWN || y === UNKNOWN || z === UNKNOWN ? UNKNOWN : NOT_MET;
        break;
      }
      default:
        s = tests[i](f);
    }
    if (s === MET) {
      if (i < setCount && tierRank[i] > risk) risk = tierRank[i];
      if (firstRule[i] < matched) matched = firstRule[i];
      met[metCount++] = i;
    } else if (s === UNKNOWN) {
      unknown[unknownCount++] = i;
    }
  }
  // Findings and considerations are known when absent (an empty list is "none"), so they are
  // only ever met or not met, and none is met when the input lists none.
  for (let g = 0; g < 2; g++) {
    const bits = g === 0 ? f.findings : f.considerations;
    if (bits === 0) continue;
    const group = g === 0 ? plan.findingMembers : plan.considerationMembers;
    for (let k = 0; k < group.length; k++) {
      const i = group[k];
      if ((bits & a[i]) === 0) continue;
      if (i < setCount && tierRank[i] > risk) risk = tierRank[i];
      if (firstRule[i] < matched) matched = firstRule[i];
      met[metCount++] = i;
    }
  }
  // Back into member order (the set's order, then the policy's own): a few entries at most.
  for (let k = 1; k < metCount; k++) {
    const i = met[k];
    let j = k - 1;
    while (j >= 0 && met[j] > i) met[j + 1] = met[j--];
    met[j + 1] = i;
  }
  const activation: LevelId = matched < plan.ruleLevel.length ? plan.ruleLevel[matched] : 'none';

  const criteria: FiredCriterion[] = [];
  for (let k = 0; k < metCount; k++) {
    const i = met[k];
    if (i >= setCount && calls[i] === null) continue;
    const c = about[i];
    criteria.push({
      id: c.id, set: c.set, tier: c.tier, label: c.label, because: members[i].explain(f),
      source: c.source, calls: c.calls, nemsis: c.nemsis,
    });
  }
  let missingBits = 0;
  for (let k = 0; k < unknownCount; k++) {
    const i = unknown[k];
    if ((i < setCount && tierRank[i] > risk) || firstRule[i] < matched) missingBits |= members[i].missing(f);
  }
  const missing: MissingInput[] = [];
  // Lowest bit first, which is MISSING_INPUTS order.
  while (missingBits !== 0) {
    const low = missingBits & -missingBits;
    missing.push(MISSING[31 - Math.clz32(low)]);
    missingBits ^= low;
  }

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
