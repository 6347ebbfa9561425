import { considerationOptions, findingOptions } from '../schemas/clinical-options';
import type { Condition, Criterion, Quantity } from './criteria';
import { CONSIDERATION_BIT, FINDING_BIT, FLAG_INDEX, QUANTITY_INDEX, TRI } from './facts';
import type { Facts, TriState } from './facts';
import { MISSING_BIT } from './missing-inputs';

// Turns criterion data, once, into steps the evaluator runs from columns of numbers in its own
// loop, and into closures: test() is the general three-valued form the steps are held to,
// explain() runs only for a met criterion, missing() only for an unknown one.

// Module-local copies: some loaders compile imported bindings into getter calls, which the
// closures below would otherwise pay on every comparison.
const { NOT_MET, MET, UNKNOWN } = TRI;

export interface CompiledCondition {
  test(f: Facts): TriState;
  explain(f: Facts): string;
  /** Bits of MISSING_INPUTS whose absence leaves this condition unknown. */
  missing(f: Facts): number;
}

export interface CompiledCriterion extends CompiledCondition {
  criterion: Criterion;
  /** 2 high, 1 moderate, 0 none (policy-catalog conditions). */
  tierRank: number;
  /** The same condition as steps the evaluator runs in its own loop, without a call. */
  steps: Step[];
}

/**
 * One step of a criterion's program, in post-order: a leaf compares numbers of the facts and
 * gives a three-valued state; `OP_ALL` and `OP_ANY` join the states of the `a` steps before them.
 * A comparison joined with an age band by "and" is one step with the band as [from, below).
 * Same answers as `test` (a property test holds them to it).
 */
export interface Step {
  op: number;
  /** A quantity, flag index or bit, or the number of parts joined; `b` and `c` the second quantity or further flags. */
  a: number;
  b: number;
  c: number;
  /** Threshold, upper threshold (OP_OUTSIDE), and the threshold's rise per completed year of age. */
  t: number;
  t2: number;
  perYear: number;
  /** The age band in completed years, [from, below): −∞ to ∞ when the step has none. */
  from: number;
  below: number;
}

export const OP_FINDING = 1;
export const OP_CONSIDERATION = 2;
export const OP_FLAG = 3;
/** Quantity < t + perYear × years, in the age band. */
export const OP_BELOW = 4;
/** Quantity > t, in the age band. */
export const OP_ABOVE = 5;
/** Quantity ≤ t, in the age band. */
export const OP_AT_MOST = 6;
/** Quantity a > quantity b, in the age band. */
export const OP_EXCEEDS = 7;
/** Quantity < t or > t2. */
export const OP_OUTSIDE = 8;
/** Any of the flags a, b, c met. */
export const OP_ANY_FLAG = 9;
/** Met in the age band, not met outside it. */
export const OP_AGE = 10;
/** SpO2 < t on room air. */
export const OP_ROOM_AIR_SPO2_BELOW = 11;
/** Pregnant more than t weeks. */
export const OP_PREGNANCY_ABOVE = 12;
/** All of the `a` states before it; any of them. */
export const OP_ALL = 13;
export const OP_ANY = 14;

const step = (op: number, fields: Partial<Step> = {}): Step => ({
  op, a: 0, b: 0, c: 0, t: 0, t2: 0, perYear: 0, from: -Infinity, below: Infinity, ...fields,
});
const COMPARISONS = new Set([OP_BELOW, OP_ABOVE, OP_AT_MOST, OP_EXCEEDS]);

/** The condition as one step when it is a leaf or one of the joined forms read in one go. */
function leafStep(c: Condition): Step | null {
  switch (c.kind) {
    case 'finding': return step(OP_FINDING, { a: FINDING_BIT[c.finding] });
    case 'consideration': return step(OP_CONSIDERATION, { a: CONSIDERATION_BIT[c.consideration] });
    case 'flag': return step(OP_FLAG, { a: FLAG_INDEX[c.flag] });
    case 'below': return step(OP_BELOW, { a: QUANTITY_INDEX[c.quantity], t: c.value, perYear: c.perYearOfAge ?? 0 });
    case 'above': return step(OP_ABOVE, { a: QUANTITY_INDEX[c.quantity], t: c.value });
    case 'at-most': return step(OP_AT_MOST, { a: QUANTITY_INDEX[c.quantity], t: c.value });
    case 'exceeds': return step(OP_EXCEEDS, { a: QUANTITY_INDEX[c.quantity], b: QUANTITY_INDEX[c.other] });
    case 'age': return step(OP_AGE, { from: c.from ?? -Infinity, below: c.below ?? Infinity });
    case 'room-air-spo2-below': return step(OP_ROOM_AIR_SPO2_BELOW, { t: c.value });
    case 'pregnancy-above': return step(OP_PREGNANCY_ABOVE, { t: c.weeks });
    case 'any': {
      const [x, y] = c.of;
      if (c.of.length === 2 && x.kind === 'below' && y.kind === 'above' && x.quantity === y.quantity && !x.perYearOfAge) {
        return step(OP_OUTSIDE, { a: QUANTITY_INDEX[x.quantity], t: x.value, t2: y.value });
      }
      if (c.of.length <= 3 && c.of.every((part) => part.kind === 'flag')) {
        // Fewer than three flags repeat the first: "a or a" is "a".
        const idx = c.of.map((part) => FLAG_INDEX[(part as Extract<Condition, { kind: 'flag' }>).flag]);
        return step(OP_ANY_FLAG, { a: idx[0], b: idx[1] ?? idx[0], c: idx[2] ?? idx[0] });
      }
      return null;
    }
    case 'all': {
      const [band, rest] = c.of;
      if (c.of.length !== 2 || band.kind !== 'age') return null;
      const inner = leafStep(rest);
      if (!inner || !COMPARISONS.has(inner.op)) return null;
      return { ...inner, from: band.from ?? -Infinity, below: band.below ?? Infinity };
    }
  }
}

export function stepsOf(c: Condition): Step[] {
  const leaf = leafStep(c);
  if (leaf) return [leaf];
  if (c.kind !== 'any' && c.kind !== 'all') throw new Error(`no step for condition ${c.kind}`);
  return [...c.of.flatMap(stepsOf), step(c.kind === 'any' ? OP_ANY : OP_ALL, { a: c.of.length })];
}

// Whole numbers are most recorded values; a table spares a number-to-text conversion per explanation.
const WHOLE = Array.from({ length: 1001 }, (_, i) => String(i));
// Rounded tenths and thousandths (heights, feet) are put together from tables too. The text is the
// same as String(r / p): below 1001 a decimal with at most three places is the shortest text that
// reads back to its double.
const fractionTexts = (p: number, places: number): string[] =>
  Array.from({ length: p }, (_, i) => (i === 0 ? '' : '.' + String(i).padStart(places, '0').replace(/0+$/, '')));
const FRACTION: Record<number, string[]> = { 10: fractionTexts(10, 1), 1000: fractionTexts(1000, 3) };
const fmt = (n: number, digits = 1): string => {
  if ((n | 0) === n && n >= 0 && n <= 1000) return WHOLE[n];
  const p = digits === 1 ? 10 : 10 ** digits;
  const r = Math.round(n * p);
  const fraction = FRACTION[p];
  if (fraction !== undefined && r >= 0 && r <= 1000 * p) {
    const whole = Math.floor(r / p);
    return WHOLE[whole] + fraction[r - whole * p];
  }
  return String(r / p);
};

const LABEL: Record<Quantity, string> = { sbp: 'SBP', hr: 'HR', rr: 'RR', heightM: 'fall', gcsTotal: 'GCS', gcsMotor: 'motor GCS' };
const BIT = {
  sbp: MISSING_BIT['vitals.sbp'], hr: MISSING_BIT['vitals.hr'], rr: MISSING_BIT['vitals.rr'],
  spo2: MISSING_BIT['vitals.spo2'], roomAir: MISSING_BIT['vitals.spo2RoomAir'],
  gcs: MISSING_BIT['vitals.gcs'], eye: MISSING_BIT['vitals.gcs.eye'], verbal: MISSING_BIT['vitals.gcs.verbal'],
  motor: MISSING_BIT['vitals.gcs.motor'], pregnancy: MISSING_BIT['pregnancyWeeks'],
} as const;
const FLAG_TEXT = {
  anticoagulant: 'on an anticoagulant',
  intubated: 'intubated',
  respiratorySupport: 'on respiratory support',
  respiratoryDistress: 'in respiratory distress',
  headImpact: 'head struck',
} as const;
const FLAG_FIELD_BIT = {
  anticoagulant: MISSING_BIT['anticoagulant'],
  intubated: MISSING_BIT['vitals.intubated'],
  respiratorySupport: MISSING_BIT['vitals.respiratorySupport'],
  respiratoryDistress: MISSING_BIT['vitals.respiratoryDistress'],
  headImpact: MISSING_BIT['fall.headImpact'],
} as const;
const FINDING_TEXT = Object.fromEntries(findingOptions.map((o) => [o.id, o.label.toLowerCase()]));
const CONSIDERATION_TEXT = Object.fromEntries(considerationOptions.map((o) => [o.id, o.label.toLowerCase()]));

function gcsPart(v: number): string {
  return v === v ? fmt(v) : '?';
}

function gcsParts(f: Facts): string {
  return `E${gcsPart(f.eye)} V${gcsPart(f.verbal)} M${gcsPart(f.motor)}`;
}

/** True when the text is the value alone: one recorded value, not a bound or a GCS put together from the rest. */
function isPlain(q: Quantity, i: number, f: Facts): boolean {
  if (q === 'heightM') return true;
  if (f.lo[i] !== f.hi[i]) return false;
  if (q === 'gcsMotor') return f.motor === f.motor;
  if (q === 'gcsTotal') return f.gcsTotalRecorded === f.gcsTotalRecorded;
  return true;
}

/**
 * A fall height in metres and feet, with places enough not to read the same as the threshold it
 * is compared with: "fall 6.1 m (20.01 ft) > 6.096 m (20 ft)", not "(20 ft) > (20 ft)" [ours].
 */
function heightText(v: number, threshold?: number): string {
  if (v === 0) return 'fall from standing (0 m)';
  let m = 3, ft = 1;
  if (threshold !== undefined && v !== threshold) {
    while (m < 6 && fmt(v, m) === fmt(threshold, m)) m++;
    while (ft < 4 && fmt(v / 0.3048, ft) === fmt(threshold / 0.3048, ft)) ft++;
  }
  return `fall ${fmt(v, m)} m (${fmt(v / 0.3048, ft)} ft)`;
}

function plainText(q: Quantity, v: number): string {
  return q === 'heightM' ? heightText(v) : `${LABEL[q]} ${fmt(v)}`;
}

/** The value as recorded, or the bound that decided the comparison when only a range is known. */
function valueText(q: Quantity, i: number, f: Facts, bound: 'lo' | 'hi'): string {
  const lo = f.lo[i], hi = f.hi[i];
  if (isPlain(q, i, f)) return PLAIN[i](lo);
  if (lo === hi) {
    if (q === 'gcsMotor') return `motor GCS ${fmt(lo)} (GCS total ${fmt(f.gcsTotalRecorded)})`;
    return `GCS ${fmt(lo)} (${gcsParts(f)})`;
  }
  const side = bound === 'hi' ? `at most ${fmt(hi)}` : `at least ${fmt(lo)}`;
  const basis = q === 'gcsMotor' && f.gcsTotalRecorded === f.gcsTotalRecorded ? `GCS total ${fmt(f.gcsTotalRecorded)}` : gcsParts(f);
  return `${LABEL[q]} ${side} (${basis})`;
}

/**
 * Texts that depend on one number, made once per value and kept in 256 slots: recorded values
 * repeat (whole vitals, heights in tenths of a metre or whole feet, whole years), so most
 * explanations are a lookup. A slot holds the last value that fell in it and is matched exactly
 * (Object.is, so that −0 and +0 keep their own texts).
 */
function textsByValue(make: (v: number) => string): (v: number) => string {
  const values = new Float64Array(256).fill(NaN);
  const texts: string[] = new Array<string>(256).fill('');
  return (v) => {
    // 21 is odd, so 256 whole numbers in a row take 256 different slots, and tenths spread too.
    const k = (v * 21) & 255;
    if (!Object.is(values[k], v)) {
      values[k] = v;
      texts[k] = make(v);
    }
    return texts[k];
  };
}

/** Per quantity (by QUANTITY_INDEX), its plain texts kept per value. */
const PLAIN: ((v: number) => string)[] = [];
for (const [q, i] of Object.entries(QUANTITY_INDEX)) PLAIN[i] = textsByValue((v) => plainText(q as Quantity, v));

/** A comparison's explanation: the value and the fixed tail (" < 90"), kept per value when the value alone is the text. */
function comparisonText(q: Quantity, i: number, bound: 'lo' | 'hi', tail: string, threshold: number): (f: Facts) => string {
  const byValue = textsByValue((v) => (q === 'heightM' ? heightText(v, threshold) : plainText(q, v)) + tail);
  return (f) => (isPlain(q, i, f) ? byValue(f.lo[i]) : valueText(q, i, f, bound) + tail);
}

function quantityMissing(q: Quantity, i: number, f: Facts): number {
  if (q === 'sbp' || q === 'hr' || q === 'rr') return f.lo[i] === -Infinity ? BIT[q] : 0;
  if (q === 'heightM') return 0;
  if (!f.gcsRecorded) return BIT.gcs;
  if (q === 'gcsMotor') return BIT.motor;
  let bits = 0;
  if (f.eye !== f.eye) bits |= BIT.eye;
  if (f.verbal !== f.verbal) bits |= BIT.verbal;
  if (f.motor !== f.motor) bits |= BIT.motor;
  return bits;
}

const QUANTITY_AT = Object.entries(QUANTITY_INDEX).sort((x, y) => x[1] - y[1]).map(([q]) => q as Quantity);
const FLAG_BIT_AT = Object.entries(FLAG_INDEX).sort((x, y) => x[1] - y[1]).map(([flag]) => FLAG_FIELD_BIT[flag as keyof typeof FLAG_FIELD_BIT]);

/**
 * The missing inputs of a leaf step left unknown when they are the same for every input that
 * leaves it unknown (a flag, a vital sign that was not recorded, pregnancy); null when they
 * depend on more (GCS parts, SpO2 on room air, two quantities, several flags).
 */
export function fixedStepMissing(s: Step): number | null {
  switch (s.op) {
    case OP_FLAG: return FLAG_BIT_AT[s.a];
    case OP_BELOW: case OP_ABOVE: case OP_AT_MOST: case OP_OUTSIDE: {
      const q = QUANTITY_AT[s.a];
      // Unknown only when not recorded: a recorded value decides every comparison.
      return q === 'sbp' || q === 'hr' || q === 'rr' ? BIT[q] : q === 'heightM' ? 0 : null;
    }
    case OP_PREGNANCY_ABOVE: return BIT.pregnancy;
    case OP_AGE: case OP_FINDING: case OP_CONSIDERATION: return 0;
    default: return null;
  }
}

/**
 * The missing inputs of one leaf step left unknown, as missing() of its condition gives them.
 * Only a step in the unknown state is asked.
 */
export function stepMissing(s: Step, f: Facts): number {
  const fixed = fixedStepMissing(s);
  if (fixed !== null) return fixed;
  switch (s.op) {
    case OP_BELOW: case OP_ABOVE: case OP_AT_MOST: case OP_OUTSIDE: return quantityMissing(QUANTITY_AT[s.a], s.a, f);
    case OP_EXCEEDS: return quantityMissing(QUANTITY_AT[s.a], s.a, f) | quantityMissing(QUANTITY_AT[s.b], s.b, f);
    case OP_ANY_FLAG:
      return (f.flags[s.a] === UNKNOWN ? FLAG_BIT_AT[s.a] : 0) | (f.flags[s.b] === UNKNOWN ? FLAG_BIT_AT[s.b] : 0)
        | (f.flags[s.c] === UNKNOWN ? FLAG_BIT_AT[s.c] : 0);
    case OP_ROOM_AIR_SPO2_BELOW: return (f.spo2 !== f.spo2 ? BIT.spo2 : 0) | (f.roomAir === UNKNOWN ? BIT.roomAir : 0);
    default: return 0;
  }
}

function thresholdText(c: { quantity: Quantity; value: number; display?: string }): string {
  return c.display ?? (c.quantity === 'heightM' ? `${c.value} m` : String(c.value));
}

// The comparisons of the leaf closures (the evaluator's own loop makes the same ones from its columns).
function belowState(f: Facts, i: number, t: number): TriState {
  return f.hi[i] < t ? MET : f.lo[i] >= t ? NOT_MET : UNKNOWN;
}
function aboveState(f: Facts, i: number, t: number): TriState {
  return f.lo[i] > t ? MET : f.hi[i] <= t ? NOT_MET : UNKNOWN;
}
function exceedsState(f: Facts, a: number, b: number): TriState {
  return f.lo[a] > f.hi[b] ? MET : f.hi[a] <= f.lo[b] ? NOT_MET : UNKNOWN;
}

export function compileCondition(c: Condition): CompiledCondition {
  switch (c.kind) {
    case 'below': {
      const i = QUANTITY_INDEX[c.quantity];
      const base = c.value;
      const perYear = c.perYearOfAge ?? 0;
      // The constant tail of the explanation is joined once, here, not per explanation.
      const fixed = comparisonText(c.quantity, i, 'hi', ` < ${thresholdText(c)}`, c.value);
      return {
        test: (f) => belowState(f, i, base + perYear * f.years),
        explain: (f) => {
          if (!perYear) return fixed(f);
          const t = base + perYear * f.years;
          return `${valueText(c.quantity, i, f, 'hi')} < ${fmt(t)} (${fmt(base)} + ${fmt(perYear)} × ${fmt(f.years)})`;
        },
        missing: (f) => quantityMissing(c.quantity, i, f),
      };
    }
    case 'above': {
      const i = QUANTITY_INDEX[c.quantity];
      const t = c.value;
      const explain = comparisonText(c.quantity, i, 'lo', ` > ${thresholdText(c)}`, c.value);
      return {
        test: (f) => aboveState(f, i, t),
        explain,
        missing: (f) => quantityMissing(c.quantity, i, f),
      };
    }
    case 'at-most': {
      const i = QUANTITY_INDEX[c.quantity];
      const t = c.value;
      const explain = comparisonText(c.quantity, i, 'hi', ` ≤ ${thresholdText(c)}`, c.value);
      return {
        test: (f) => (f.hi[i] <= t ? MET : f.lo[i] > t ? NOT_MET : UNKNOWN),
        explain,
        missing: (f) => quantityMissing(c.quantity, i, f),
      };
    }
    case 'exceeds': {
      const a = QUANTITY_INDEX[c.quantity], b = QUANTITY_INDEX[c.other];
      return {
        test: (f) => exceedsState(f, a, b),
        explain: (f) => `${valueText(c.quantity, a, f, 'lo')} > ${valueText(c.other, b, f, 'hi')}`,
        missing: (f) => quantityMissing(c.quantity, a, f) | quantityMissing(c.other, b, f),
      };
    }
    case 'age': {
      const from = c.from ?? -Infinity, below = c.below ?? Infinity;
      const byAge = textsByValue((age) => `${ageText(age)} (${c.label})`);
      return {
        test: (f) => (f.years >= from && f.years < below ? MET : NOT_MET),
        explain: (f) => byAge(f.ageYears),
        missing: () => 0,
      };
    }
    case 'flag': {
      const i = FLAG_INDEX[c.flag];
      const text = FLAG_TEXT[c.flag], bit = FLAG_FIELD_BIT[c.flag];
      return { test: (f) => f.flags[i] as TriState, explain: () => text, missing: () => bit };
    }
    case 'finding': {
      const bit = FINDING_BIT[c.finding], text = FINDING_TEXT[c.finding];
      return { test: (f) => ((f.findings & bit) !== 0 ? MET : NOT_MET), explain: () => text, missing: () => 0 };
    }
    case 'consideration': {
      const bit = CONSIDERATION_BIT[c.consideration], text = CONSIDERATION_TEXT[c.consideration];
      return { test: (f) => ((f.considerations & bit) !== 0 ? MET : NOT_MET), explain: () => text, missing: () => 0 };
    }
    case 'room-air-spo2-below': {
      const t = c.value;
      // On oxygen the reading is not a room-air one; the crew's oxygen is recorded as respiratory
      // support, which is its own criterion [ours].
      return {
        test: (f) => {
          if (f.roomAir === NOT_MET) return NOT_MET;
          if (f.spo2 !== f.spo2) return UNKNOWN;
          if (f.spo2 >= t) return NOT_MET;
          return f.roomAir === MET ? MET : UNKNOWN;
        },
        explain: (f) => `SpO2 ${fmt(f.spo2)} % on room air < ${t} %`,
        missing: (f) => (f.spo2 !== f.spo2 ? BIT.spo2 : 0) | (f.roomAir === UNKNOWN ? BIT.roomAir : 0),
      };
    }
    case 'pregnancy-above': {
      const w = c.weeks;
      return {
        test: (f) => {
          const p = f.pregnancyWeeks;
          if (p === p) return p > w ? MET : NOT_MET;
          // Not asked of a patient recorded male, or outside ages 10–59 [ours].
          return f.sex === 'male' || f.years < 10 || f.years >= 60 ? NOT_MET : UNKNOWN;
        },
        explain: (f) => `pregnant ${fmt(f.pregnancyWeeks)} weeks > ${w}`,
        missing: () => BIT.pregnancy,
      };
    }
    case 'any': {
      const parts = c.of.map(compileCondition);
      return {
        test: (f) => {
          let out: TriState = NOT_MET;
          for (let i = 0; i < parts.length; i++) {
            const s = parts[i].test(f);
            if (s === MET) return MET;
            if (s === UNKNOWN) out = UNKNOWN;
          }
          return out;
        },
        explain: (f) => {
          let text = '';
          for (let i = 0; i < parts.length; i++) {
            if (parts[i].test(f) === MET) text += (text === '' ? '' : ', ') + parts[i].explain(f);
          }
          return text;
        },
        missing: (f) => unknownPartsMissing(parts, f),
      };
    }
    case 'all': {
      const parts = c.of.map(compileCondition);
      // Reads "SBP 84 < 90, age 34 (10–64)": the deciding value first, the age band after it.
      const spoken = c.of.map((sub, i) => ({ sub, part: parts[i] }))
        .sort((x, y) => Number(x.sub.kind === 'age') - Number(y.sub.kind === 'age'))
        .map((x) => x.part);
      return {
        test: (f) => {
          let out: TriState = MET;
          for (let i = 0; i < parts.length; i++) {
            const s = parts[i].test(f);
            if (s === NOT_MET) return NOT_MET;
            if (s === UNKNOWN) out = UNKNOWN;
          }
          return out;
        },
        explain: (f) => {
          let text = spoken[0].explain(f);
          for (let i = 1; i < spoken.length; i++) text += ', ' + spoken[i].explain(f);
          return text;
        },
        missing: (f) => unknownPartsMissing(parts, f),
      };
    }
  }
}

function unknownPartsMissing(parts: readonly CompiledCondition[], f: Facts): number {
  let bits = 0;
  for (let i = 0; i < parts.length; i++) if (parts[i].test(f) === UNKNOWN) bits |= parts[i].missing(f);
  return bits;
}

export function ageText(ageYears: number): string {
  if (ageYears < 2 && !Number.isInteger(ageYears)) return `age ${Math.round(ageYears * 12)} months`;
  return `age ${fmt(ageYears)}`;
}

export function compileCriterion(criterion: Criterion): CompiledCriterion {
  const compiled = compileCondition(criterion.when);
  return {
    steps: stepsOf(criterion.when),
    criterion,
    tierRank: criterion.tier === 'high' ? 2 : criterion.tier === 'moderate' ? 1 : 0,
    test: compiled.test,
    explain: compiled.explain,
    missing: compiled.missing,
  };
}
