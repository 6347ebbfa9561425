import { considerationOptions, findingOptions } from '../schemas/clinical-options';
import type { Condition, Criterion, Quantity } from './criteria';
import { CONSIDERATION_BIT, FINDING_BIT, FLAG_INDEX, QUANTITY_INDEX, TRI, bodyHeightOf } from './facts';
import type { Facts, TriState } from './facts';
import { MISSING_BIT } from './missing-inputs';
import { ageText, fmt, heightText, keptByValue, textsByValue, type HeightFact } from './explain-text';

export { ageText, type HeightFact };

// The one evaluator of criteria, in the browser and on the server alike: each criterion's data
// (its `when` tree, SOURCES.md §1) is turned once into closures. test() gives the three-valued
// state (met, not met, unknown: an unknown value never passes as normal), explain() runs only
// for a met criterion, missing() only for an unknown one. No code is made at run time, so it runs
// under the browser's content-security policy. Any criterion given as data is evaluated this way,
// a hospital's own included.

// Module-local copies: some loaders compile imported bindings into getter calls, which the
// closures below would otherwise pay on every comparison.
const { NOT_MET, MET, UNKNOWN } = TRI;

export interface CompiledCondition {
  test(f: Facts): TriState;
  explain(f: Facts): string;
  /** Bits of MISSING_INPUTS whose absence leaves this condition unknown. */
  missing(f: Facts): number;
  /**
   * For a met condition, the fall heights its explanation states, added to `out`; null when the
   * condition never states one (most do not), so the evaluator skips it.
   */
  heights: ((f: Facts, out: HeightFact[]) => void) | null;
}


export interface CompiledCriterion extends CompiledCondition {
  criterion: Criterion;
  /** 2 high, 1 moderate, 0 none (policy-catalog conditions). */
  tierRank: number;
}


const LABEL: Record<Quantity, string> = { sbp: 'SBP', hr: 'HR', rr: 'RR', heightM: 'fall', gcsTotal: 'GCS', gcsMotor: 'motor GCS' };
const BIT = {
  sbp: MISSING_BIT['vitals.sbp'], hr: MISSING_BIT['vitals.hr'], rr: MISSING_BIT['vitals.rr'],
  spo2: MISSING_BIT['vitals.spo2'], roomAir: MISSING_BIT['vitals.spo2RoomAir'], roomAirSpo2: MISSING_BIT['vitals.spo2@room-air'],
  bodyHeight: MISSING_BIT['bodyHeightCm'],
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


/** Per quantity (by QUANTITY_INDEX), its plain texts kept per value. */
const PLAIN: ((v: number) => string)[] = [];
for (const [q, i] of Object.entries(QUANTITY_INDEX)) PLAIN[i] = textsByValue((v) => plainText(q as Quantity, v));

/** A comparison's explanation: the value and the fixed tail (" < 90"), kept per value when the value alone is the text. */
function comparisonText(q: Quantity, i: number, bound: 'lo' | 'hi', tail: string, threshold: number): (f: Facts) => string {
  const byValue = textsByValue((v) => (q === 'heightM' ? heightText(v, threshold) : plainText(q, v)) + tail);
  return (f) => (isPlain(q, i, f) ? byValue(f.lo[i]) : valueText(q, i, f, bound) + tail);
}

const NO_FACT: HeightFact = Object.freeze({ text: '', heightM: NaN });

/** A height comparison's fact, kept per value as its text is; the text is the whole comparison, tail included. */
function comparedHeight(i: number, tail: string, relation: 'above' | 'below' | 'at-most', thresholdM: number): (f: Facts, out: HeightFact[]) => void {
  const compared = Object.freeze({ relation, thresholdM });
  const byValue = keptByValue((v): HeightFact => Object.freeze({ text: heightText(v, thresholdM) + tail, heightM: v, compared }), NO_FACT);
  return (f, out) => { out.push(byValue(f.lo[i])); };
}

/** A height stated alone ("fall 2 m (6.6 ft)"), compared with no figure of the criterion's own. */
function plainHeight(i: number): (f: Facts, out: HeightFact[]) => void {
  return (f, out) => { out.push({ text: PLAIN[i](f.lo[i]), heightM: f.lo[i] }); };
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
      const tail = ` < ${thresholdText(c)}`;
      const fixed = comparisonText(c.quantity, i, 'hi', tail, c.value);
      return {
        test: (f) => belowState(f, i, base + perYear * f.years),
        explain: (f) => {
          if (!perYear) return fixed(f);
          const t = base + perYear * f.years;
          return `${valueText(c.quantity, i, f, 'hi')} < ${fmt(t)} (${fmt(base)} + ${fmt(perYear)} × ${fmt(f.years)})`;
        },
        missing: (f) => quantityMissing(c.quantity, i, f),
        heights: c.quantity !== 'heightM' ? null : perYear ? plainHeight(i) : comparedHeight(i, tail, 'below', c.value),
      };
    }
    case 'above': {
      const i = QUANTITY_INDEX[c.quantity];
      const t = c.value;
      const tail = ` > ${thresholdText(c)}`;
      const explain = comparisonText(c.quantity, i, 'lo', tail, c.value);
      return {
        test: (f) => aboveState(f, i, t),
        explain,
        missing: (f) => quantityMissing(c.quantity, i, f),
        heights: c.quantity === 'heightM' ? comparedHeight(i, tail, 'above', t) : null,
      };
    }
    case 'at-most': {
      const i = QUANTITY_INDEX[c.quantity];
      const t = c.value;
      const tail = ` ≤ ${thresholdText(c)}`;
      const explain = comparisonText(c.quantity, i, 'hi', tail, c.value);
      return {
        test: (f) => (f.hi[i] <= t ? MET : f.lo[i] > t ? NOT_MET : UNKNOWN),
        explain,
        missing: (f) => quantityMissing(c.quantity, i, f),
        heights: c.quantity === 'heightM' ? comparedHeight(i, tail, 'at-most', t) : null,
      };
    }
    case 'exceeds': {
      const a = QUANTITY_INDEX[c.quantity], b = QUANTITY_INDEX[c.other];
      return {
        test: (f) => exceedsState(f, a, b),
        explain: (f) => `${valueText(c.quantity, a, f, 'lo')} > ${valueText(c.other, b, f, 'hi')}`,
        missing: (f) => quantityMissing(c.quantity, a, f) | quantityMissing(c.other, b, f),
        heights: c.quantity === 'heightM' ? plainHeight(a) : c.other === 'heightM' ? plainHeight(b) : null,
      };
    }
    case 'age': {
      const from = c.from ?? -Infinity, below = c.below ?? Infinity;
      const byAge = textsByValue((age) => `${ageText(age)} (${c.label})`);
      return {
        test: (f) => (f.years >= from && f.years < below ? MET : NOT_MET),
        explain: (f) => byAge(f.ageYears),
        missing: () => 0,
        heights: null,
      };
    }
    case 'flag': {
      const i = FLAG_INDEX[c.flag];
      const text = FLAG_TEXT[c.flag], bit = FLAG_FIELD_BIT[c.flag];
      return { test: (f) => f.flags[i] as TriState, explain: () => text, missing: () => bit, heights: null };
    }
    case 'finding': {
      const bit = FINDING_BIT[c.finding], text = FINDING_TEXT[c.finding];
      return { test: (f) => ((f.findings & bit) !== 0 ? MET : NOT_MET), explain: () => text, missing: () => 0, heights: null };
    }
    case 'consideration': {
      const bit = CONSIDERATION_BIT[c.consideration], text = CONSIDERATION_TEXT[c.consideration];
      return { test: (f) => ((f.considerations & bit) !== 0 ? MET : NOT_MET), explain: () => text, missing: () => 0, heights: null };
    }
    case 'room-air-spo2-below': {
      const t = c.value;
      // Below t on oxygen means below t on room air too; at or above t on oxygen says nothing of
      // room air, so the criterion is unknown and the room-air reading is missing (SOURCES.md §2.4).
      return {
        test: (f) => {
          const spo2 = f.spo2;
          if (spo2 !== spo2) return UNKNOWN;
          if (spo2 < t) return MET;
          return f.roomAir === MET ? NOT_MET : UNKNOWN;
        },
        explain: (f) => (f.roomAir === MET
          ? `SpO2 ${fmt(f.spo2)} % on room air < ${t} %`
          : f.roomAir === NOT_MET
            ? `SpO2 ${fmt(f.spo2)} % on oxygen < ${t} %, so lower still on room air`
            : `SpO2 ${fmt(f.spo2)} % < ${t} %, on room air or, if on oxygen, lower still on room air`),
        missing: (f) => (f.spo2 !== f.spo2
          ? BIT.spo2 | (f.roomAir === UNKNOWN ? BIT.roomAir : 0)
          : f.roomAir === NOT_MET ? BIT.roomAirSpo2 : BIT.roomAir),
        heights: null,
      };
    }
    case 'fall-above-body-heights': {
      const times = c.times;
      const fallAt = QUANTITY_INDEX.heightM;
      return {
        test: (f) => {
          const body = bodyHeightOf(f);
          if (body !== body) return UNKNOWN;
          return f.lo[fallAt] > times * body ? MET : NOT_MET;
        },
        explain: (f) => {
          const body = bodyHeightOf(f);
          const basis = f.bodyHeightReference === null
            ? `height ${fmt(body, 2)} m as recorded`
            : `height ${fmt(body, 2)} m estimated from ${ageText(f.ageYears)}, ${f.bodyHeightReference}`;
          return `${heightText(f.lo[fallAt], times * body)} > ${fmt(times)} × the child's height (${basis})`;
        },
        missing: (f) => (bodyHeightOf(f) !== bodyHeightOf(f) ? BIT.bodyHeight : 0),
        heights: (f, out) => { out.push({ text: heightText(f.lo[fallAt], times * bodyHeightOf(f)), heightM: f.lo[fallAt] }); },
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
        heights: null,
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
        // Only the parts met are explained, so only theirs are stated.
        heights: partHeights(parts, true),
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
        heights: partHeights(parts, false),
      };
    }
  }
}

function partHeights(parts: readonly CompiledCondition[], metOnly: boolean): CompiledCondition['heights'] {
  const stating = parts.filter((p) => p.heights !== null);
  if (!stating.length) return null;
  return (f, out) => {
    for (const p of stating) if (!metOnly || p.test(f) === MET) p.heights!(f, out);
  };
}

function unknownPartsMissing(parts: readonly CompiledCondition[], f: Facts): number {
  let bits = 0;
  for (let i = 0; i < parts.length; i++) if (parts[i].test(f) === UNKNOWN) bits |= parts[i].missing(f);
  return bits;
}


export function compileCriterion(criterion: Criterion): CompiledCriterion {
  const compiled = compileCondition(criterion.when);
  return {
    criterion,
    tierRank: criterion.tier === 'high' ? 2 : criterion.tier === 'moderate' ? 1 : 0,
    test: compiled.test,
    explain: compiled.explain,
    missing: compiled.missing,
    heights: compiled.heights,
  };
}
