import type { ClinicalInput } from '../schemas/clinical';
import { fallImpact, type Impact } from '../physics/impact';
import { CRITERIA_SETS, DEFAULT_SET, compiledCriterion } from './catalog';
import * as compiled from './compile-criteria';
import type { CompiledCriterion } from './compile-criteria';
import type { CriteriaSetId, CriterionSetId, NemsisCode, RiskTier } from './criteria';
import { TRI, createFacts, readFacts } from './facts';
import { MISSING_INPUTS, type MissingInput } from './missing-inputs';
import { straightLine, type StraightLine } from './straight-line';
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
  /**
   * The steps of every member but a lone finding or consideration (those are tested only when
   * the input lists any), one member after another, as columns (see compile-criteria.ts).
   * `root[n]` is the member whose last step is n, −1 for a step inside a member.
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
  root: Int32Array;
  /** The same steps as one function with constants, where the engine allows making one, and as the step loop. */
  generated: StraightLine | null;
  loop: StraightLine;
  /** Lone findings and considerations: the members and their bits. */
  findingMembers: Int32Array;
  findingBits: Int32Array;
  considerationMembers: Int32Array;
  considerationBits: Int32Array;
  tierRank: Int8Array;
  setCount: number;
  /** Per member, the index of the first rule naming it; rules.length when none does. */
  firstRule: Int32Array;
  ruleLevel: LevelId[];
  /** The policy's display name of each rule's level, then of none. */
  ruleName: string[];
  policyRef: Evaluation['policy'];
  /**
   * Scratch for one evaluation: the members met, the members unknown and their missing inputs,
   * the runner's four counts (risk, matched rule, met, unknown), and the step loop's states of
   * steps not yet joined.
   */
  met: Int32Array;
  unknown: Int32Array;
  unknownMissing: Int32Array;
  out: Int32Array;
  pending: Uint8Array;
}

/**
 * Whether a plan's steps run as one generated function (see straight-line.ts) where that can be
 * made, or always in the step loop a browser runs. Tests switch it to hold the two to each other.
 */
export const stepRunner = { straightLine: true };

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
  const ruleName = [...policy.rules.map((r) => levelName[r.level]), levelName.none];
  const lone = (op: number) => members.flatMap((m, i) => (m.steps.length === 1 && m.steps[0].op === op ? [[i, m.steps[0].a]] : []));
  const findings = lone(compiled.OP_FINDING), considerations = lone(compiled.OP_CONSIDERATION);
  const alone = new Set([...findings, ...considerations].map(([i]) => i));
  const steps: compiled.Step[] = [];
  const root: number[] = [];
  members.forEach((m, i) => {
    if (alone.has(i)) return;
    m.steps.forEach((s, k) => {
      steps.push(s);
      root.push(k === m.steps.length - 1 ? i : -1);
    });
  });
  const plan: Omit<Plan, 'loop'> = {
    members, setCount, firstRule,
    about: members.map(({ criterion: c }, i) => ({
      id: c.id, set: c.set, tier: c.tier, label: c.label, source: c.source, calls: calls[i], nemsis: c.nemsis,
    })),
    op: Uint8Array.from(steps, (s) => s.op),
    a: Int32Array.from(steps, (s) => s.a),
    b: Int32Array.from(steps, (s) => s.b),
    c: Int32Array.from(steps, (s) => s.c),
    t: Float64Array.from(steps, (s) => s.t),
    t2: Float64Array.from(steps, (s) => s.t2),
    perYear: Float64Array.from(steps, (s) => s.perYear),
    from: Float64Array.from(steps, (s) => s.from),
    below: Float64Array.from(steps, (s) => s.below),
    root: Int32Array.from(root),
    generated: straightLine(members.flatMap((m, i) => (alone.has(i) ? [] : [{
      index: i, steps: m.steps, risk: i < setCount ? m.tierRank : 0, firstRule: firstRule[i],
    }])), policy.rules.length),
    out: new Int32Array(4),
    unknownMissing: new Int32Array(members.length),
    findingMembers: Int32Array.from(findings, ([i]) => i),
    findingBits: Int32Array.from(findings, ([, bit]) => bit),
    considerationMembers: Int32Array.from(considerations, ([i]) => i),
    considerationBits: Int32Array.from(considerations, ([, bit]) => bit),
    tierRank: Int8Array.from(members, (m) => m.tierRank),
    ruleLevel: policy.rules.map((r) => r.level),
    ruleName,
    policyRef: Object.freeze({ id: policy.id, version: policy.version, example: policy.example }),
    met: new Int32Array(members.length),
    unknown: new Int32Array(members.length),
    pending: new Uint8Array(steps.length),
  };
  return { ...plan, loop: stepLoop(plan) };
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
// The switch below writes the step numbers of compile-criteria.ts out as literals, each named in
// a comment: over literal labels it compiles to one jump, over imported names to a comparison per
// case. This holds the two together.
const STEP_ORDER = [
  compiled.OP_FINDING, compiled.OP_CONSIDERATION, compiled.OP_FLAG, compiled.OP_BELOW, compiled.OP_ABOVE,
  compiled.OP_AT_MOST, compiled.OP_EXCEEDS, compiled.OP_OUTSIDE, compiled.OP_ANY_FLAG, compiled.OP_AGE,
  compiled.OP_ROOM_AIR_SPO2_BELOW, compiled.OP_PREGNANCY_ABOVE, compiled.OP_ALL, compiled.OP_ANY,
];
if (STEP_ORDER.some((op, k) => op !== k + 1)) throw new Error('the evaluator reads steps numbered 1 to 14 in the order of compile-criteria.ts');
const MISSING = MISSING_INPUTS;
const read = readFacts;
const impactOf = fallImpact;
const defaultSet = DEFAULT_SET;
const defaultPolicy = EXAMPLE_POLICY;
const facts = createFacts();
const RISK: readonly FieldRisk[] = ['none', 'moderate', 'high'];

/** The plan's steps run one by one from the columns: the same pass as the generated function. */
function stepLoop(plan: Omit<Plan, 'loop'>): StraightLine {
  const { members, op, a, b, c, t, t2, perYear, from, below, root, tierRank, setCount, firstRule, pending } = plan;
  return (lo, hi, years, flags, f, met, unknown, unknownMissing, out) => {
    let risk = 0;
    let matched = plan.ruleLevel.length;
    let metCount = 0, unknownCount = 0, depth = 0;
    for (let n = 0; n < op.length; n++) {
      let s: number;
      switch (op[n]) {
        case 3: // OP_FLAG
          s = flags[a[n]];
          break;
        case 4: { // OP_BELOW
          if (years < from[n] || years >= below[n]) { s = NOT_MET; break; }
          const q = a[n], threshold = t[n] + perYear[n] * years;
          s = hi[q] < threshold ? MET : lo[q] >= threshold ? NOT_MET : UNKNOWN;
          break;
        }
        case 5: { // OP_ABOVE
          if (years < from[n] || years >= below[n]) { s = NOT_MET; break; }
          const q = a[n];
          s = lo[q] > t[n] ? MET : hi[q] <= t[n] ? NOT_MET : UNKNOWN;
          break;
        }
        case 6: { // OP_AT_MOST
          if (years < from[n] || years >= below[n]) { s = NOT_MET; break; }
          const q = a[n];
          s = hi[q] <= t[n] ? MET : lo[q] > t[n] ? NOT_MET : UNKNOWN;
          break;
        }
        case 7: { // OP_EXCEEDS
          if (years < from[n] || years >= below[n]) { s = NOT_MET; break; }
          const x = a[n], y = b[n];
          s = lo[x] > hi[y] ? MET : hi[x] <= lo[y] ? NOT_MET : UNKNOWN;
          break;
        }
        case 8: { // OP_OUTSIDE
          const q = a[n];
          s = hi[q] < t[n] || lo[q] > t2[n] ? MET : lo[q] >= t[n] && hi[q] <= t2[n] ? NOT_MET : UNKNOWN;
          break;
        }
        case 9: { // OP_ANY_FLAG
          const x = flags[a[n]], y = flags[b[n]], z = flags[c[n]];
          s = x === MET || y === MET || z === MET ? MET : x === UNKNOWN || y === UNKNOWN || z === UNKNOWN ? UNKNOWN : NOT_MET;
          break;
        }
        case 10: // OP_AGE
          s = years >= from[n] && years < below[n] ? MET : NOT_MET;
          break;
        case 11: { // OP_ROOM_AIR_SPO2_BELOW
          // On oxygen the reading is not a room-air one (see compile-criteria.ts).
          const spo2 = f.spo2, roomAir = f.roomAir;
          s = roomAir === NOT_MET || spo2 >= t[n] ? NOT_MET : spo2 !== spo2 || roomAir !== MET ? UNKNOWN : MET;
          break;
        }
        case 12: { // OP_PREGNANCY_ABOVE
          const weeks = f.pregnancyWeeks;
          s = weeks === weeks ? (weeks > t[n] ? MET : NOT_MET) : f.sex === 'male' || years < 10 || years >= 60 ? NOT_MET : UNKNOWN;
          break;
        }
        case 1: // OP_FINDING
          s = (f.findings & a[n]) !== 0 ? MET : NOT_MET;
          break;
        case 2: // OP_CONSIDERATION
          s = (f.considerations & a[n]) !== 0 ? MET : NOT_MET;
          break;
        case 13: // OP_ALL
        case 14: { // OP_ANY
          // Join the last a[n] states: "all" is not met by one not met, "any" met by one met.
          const all = op[n] === 13;
          const decides = all ? NOT_MET : MET;
          s = all ? MET : NOT_MET;
          for (let k = depth - a[n]; k < depth; k++) {
            const part = pending[k];
            if (part === decides) { s = decides; break; }
            if (part === UNKNOWN) s = UNKNOWN;
          }
          depth -= a[n];
          break;
        }
        default:
          throw new Error(`unknown step ${op[n]}`);
      }
      const i = root[n];
      if (i < 0) {
        pending[depth++] = s;
      } else if (s === MET) {
        if (i < setCount && tierRank[i] > risk) risk = tierRank[i];
        if (firstRule[i] < matched) matched = firstRule[i];
        met[metCount++] = i;
      } else if (s === UNKNOWN) {
        unknownMissing[unknownCount] = members[i].missing(f);
        unknown[unknownCount++] = i;
      }
    }
    out[0] = risk; out[1] = matched; out[2] = metCount; out[3] = unknownCount;
  };
}

/** The input is trusted to have passed ClinicalInput; parse at the boundary, not here. */
export function evaluate(input: ClinicalInput, options: EvaluateOptions = {}): Evaluation {
  const set = options.set ?? defaultSet;
  const plan = planFor(set, options.policy ?? defaultPolicy);
  const f = read(input, facts);
  const { members, about, tierRank, setCount, firstRule, met, unknown, unknownMissing, out } = plan;

  // One pass over the steps: the field risk, the first rule with a met member (the lowest
  // firstRule among them) and the met and unknown members for the two lists below.
  const run = stepRunner.straightLine && plan.generated !== null ? plan.generated : plan.loop;
  run(f.lo, f.hi, f.years, f.flags, f, met, unknown, unknownMissing, out);
  let risk = out[0], matched = out[1], metCount = out[2];
  const unknownCount = out[3];
  // Lone findings and considerations are known when absent (an empty list is "none"), so they
  // are only ever met or not met, and none is met when the input lists none.
  for (let g = 0; g < 2; g++) {
    const bits = g === 0 ? f.findings : f.considerations;
    if (bits === 0) continue;
    const group = g === 0 ? plan.findingMembers : plan.considerationMembers;
    const groupBits = g === 0 ? plan.findingBits : plan.considerationBits;
    for (let k = 0; k < group.length; k++) {
      if ((bits & groupBits[k]) === 0) continue;
      const i = group[k];
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
  // Members past the set's own are there because a rule names them, so every met member is reported.
  for (let k = 0; k < metCount; k++) {
    const i = met[k];
    const c = about[i];
    criteria.push({
      id: c.id, set: c.set, tier: c.tier, label: c.label, because: members[i].explain(f),
      source: c.source, calls: c.calls, nemsis: c.nemsis,
    });
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
    set,
    fieldRisk: RISK[risk],
    activation,
    activationName: plan.ruleName[matched],
    criteria,
    missing,
    impact: impactOf(input.fall.heightM, input.fall.surface, input.weightKg),
    policy: plan.policyRef,
  };
}
