import { considerationOptions, findingOptions } from '../schemas/clinical-options';
import type { Condition, Criterion, Quantity } from './criteria';
import { CONSIDERATION_BIT, FINDING_BIT, FLAG_INDEX, MET, NOT_MET, QUANTITY_INDEX, UNKNOWN } from './facts';
import type { Facts, TriState } from './facts';
import { MISSING_BIT } from './missing-inputs';

// Turns criterion data into closures once, so an evaluation is a few comparisons per criterion.
// explain() runs only for a met criterion, missing() only for an unknown one.

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
}

const fmt = (n: number, digits = 1): string => {
  const p = 10 ** digits;
  return String(Math.round(n * p) / p);
};

const LABEL: Record<Quantity, string> = { sbp: 'SBP', hr: 'HR', rr: 'RR', heightM: 'fall', gcsTotal: 'GCS', gcsMotor: 'motor GCS' };
const FIELD_BIT: Record<'sbp' | 'hr' | 'rr', number> = {
  sbp: MISSING_BIT['vitals.sbp'], hr: MISSING_BIT['vitals.hr'], rr: MISSING_BIT['vitals.rr'],
};
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

function gcsParts(f: Facts): string {
  const part = (v: number) => (v === v ? String(v) : '?');
  return `E${part(f.eye)} V${part(f.verbal)} M${part(f.motor)}`;
}

/** The value as recorded, or the bound that decided the comparison when only a range is known. */
function valueText(q: Quantity, f: Facts, bound: 'lo' | 'hi'): string {
  const i = QUANTITY_INDEX[q];
  const lo = f.lo[i], hi = f.hi[i];
  if (q === 'heightM') return lo === 0 ? 'fall from standing (0 m)' : `fall ${fmt(lo, 3)} m (${fmt(lo / 0.3048)} ft)`;
  if (lo === hi) {
    if (q === 'gcsMotor' && f.motor !== f.motor) return `motor GCS ${lo} (GCS total ${f.gcsTotalRecorded})`;
    if (q === 'gcsTotal' && f.gcsTotalRecorded !== f.gcsTotalRecorded) return `GCS ${lo} (${gcsParts(f)})`;
    return `${LABEL[q]} ${fmt(lo)}`;
  }
  const side = bound === 'hi' ? `at most ${hi}` : `at least ${lo}`;
  const basis = q === 'gcsMotor' && f.gcsTotalRecorded === f.gcsTotalRecorded ? `GCS total ${f.gcsTotalRecorded}` : gcsParts(f);
  return `${LABEL[q]} ${side} (${basis})`;
}

function quantityMissing(q: Quantity, f: Facts): number {
  if (q === 'sbp' || q === 'hr' || q === 'rr') return f.lo[QUANTITY_INDEX[q]] === -Infinity ? FIELD_BIT[q] : 0;
  if (q === 'heightM') return 0;
  if (!f.gcsRecorded) return MISSING_BIT['vitals.gcs'];
  if (q === 'gcsMotor') return MISSING_BIT['vitals.gcs.motor'];
  let bits = 0;
  if (f.eye !== f.eye) bits |= MISSING_BIT['vitals.gcs.eye'];
  if (f.verbal !== f.verbal) bits |= MISSING_BIT['vitals.gcs.verbal'];
  if (f.motor !== f.motor) bits |= MISSING_BIT['vitals.gcs.motor'];
  return bits;
}

function thresholdText(c: { quantity: Quantity; value: number; display?: string }): string {
  return c.display ?? (c.quantity === 'heightM' ? `${c.value} m` : String(c.value));
}

export function compileCondition(c: Condition): CompiledCondition {
  switch (c.kind) {
    case 'below': {
      const i = QUANTITY_INDEX[c.quantity];
      const base = c.value;
      const perYear = c.perYearOfAge ?? 0;
      return {
        test: (f) => {
          const t = base + perYear * f.years;
          return f.hi[i] < t ? MET : f.lo[i] >= t ? NOT_MET : UNKNOWN;
        },
        explain: (f) => {
          const t = base + perYear * f.years;
          const thr = perYear ? `${fmt(t)} (${base} + ${perYear} × ${f.years})` : thresholdText(c);
          return `${valueText(c.quantity, f, 'hi')} < ${thr}`;
        },
        missing: (f) => quantityMissing(c.quantity, f),
      };
    }
    case 'above': {
      const i = QUANTITY_INDEX[c.quantity];
      const t = c.value;
      return {
        test: (f) => (f.lo[i] > t ? MET : f.hi[i] <= t ? NOT_MET : UNKNOWN),
        explain: (f) => `${valueText(c.quantity, f, 'lo')} > ${thresholdText(c)}`,
        missing: (f) => quantityMissing(c.quantity, f),
      };
    }
    case 'at-most': {
      const i = QUANTITY_INDEX[c.quantity];
      const t = c.value;
      return {
        test: (f) => (f.hi[i] <= t ? MET : f.lo[i] > t ? NOT_MET : UNKNOWN),
        explain: (f) => `${valueText(c.quantity, f, 'hi')} ≤ ${thresholdText(c)}`,
        missing: (f) => quantityMissing(c.quantity, f),
      };
    }
    case 'exceeds': {
      const a = QUANTITY_INDEX[c.quantity], b = QUANTITY_INDEX[c.other];
      return {
        test: (f) => (f.lo[a] > f.hi[b] ? MET : f.hi[a] <= f.lo[b] ? NOT_MET : UNKNOWN),
        explain: (f) => `${valueText(c.quantity, f, 'lo')} > ${valueText(c.other, f, 'hi')}`,
        missing: (f) => quantityMissing(c.quantity, f) | quantityMissing(c.other, f),
      };
    }
    case 'age': {
      const from = c.from ?? -Infinity, below = c.below ?? Infinity;
      return {
        test: (f) => (f.years >= from && f.years < below ? MET : NOT_MET),
        explain: (f) => `${ageText(f.ageYears)} (${c.label})`,
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
        missing: (f) =>
          (f.spo2 !== f.spo2 ? MISSING_BIT['vitals.spo2'] : 0) | (f.roomAir === UNKNOWN ? MISSING_BIT['vitals.spo2RoomAir'] : 0),
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
        missing: () => MISSING_BIT['pregnancyWeeks'],
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
        explain: (f) => parts.filter((p) => p.test(f) === MET).map((p) => p.explain(f)).join(', '),
        missing: (f) => parts.reduce((bits, p) => (p.test(f) === UNKNOWN ? bits | p.missing(f) : bits), 0),
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
        explain: (f) => spoken.map((p) => p.explain(f)).join(', '),
        missing: (f) => parts.reduce((bits, p) => (p.test(f) === UNKNOWN ? bits | p.missing(f) : bits), 0),
      };
    }
  }
}

export function ageText(ageYears: number): string {
  if (ageYears < 2 && !Number.isInteger(ageYears)) return `age ${Math.round(ageYears * 12)} months`;
  return `age ${fmt(ageYears)}`;
}

export function compileCriterion(criterion: Criterion): CompiledCriterion {
  const compiled = compileCondition(criterion.when);
  return {
    criterion,
    tierRank: criterion.tier === 'high' ? 2 : criterion.tier === 'moderate' ? 1 : 0,
    test: compiled.test,
    explain: compiled.explain,
    missing: compiled.missing,
  };
}
