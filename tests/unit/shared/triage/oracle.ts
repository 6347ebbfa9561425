// A plain three-valued reading of criterion data straight from the clinical input, written apart
// from the evaluator (no facts, no closures, no caches) so that the property tests can hold the
// evaluator to it. Each rule is the one SOURCES.md states; the section is named beside it.
import type { ClinicalInput } from '../../../../shared/schemas/clinical';
import type { Condition, Criterion, Quantity } from '../../../../shared/triage/criteria';
import { estimateHeight } from '../../../../shared/triage/growth';

export type State = 'met' | 'not met' | 'unknown';

interface Range { lo: number; hi: number }

const known = (v: number | null | undefined): Range => (v == null ? { lo: -Infinity, hi: Infinity } : { lo: v, hi: v });

/** A quantity as the range it is known to lie in (SOURCES.md §2.3). */
function range(x: ClinicalInput, q: Quantity): Range {
  const v = x.vitals ?? {};
  if (q === 'sbp') return known(v.sbp);
  if (q === 'hr') return known(v.hr);
  if (q === 'rr') return known(v.rr);
  if (q === 'heightM') return known(x.fall.heightM);
  const eye = v.gcs?.eye ?? null, verbal = v.gcs?.verbal ?? null, motor = v.gcs?.motor ?? null;
  const part = (p: number | null, max: number): Range => (p == null ? { lo: 1, hi: max } : { lo: p, hi: p });
  const e = part(eye, 4), vb = part(verbal, 5), m = part(motor, 6);
  const total = v.gcsTotal ?? null;
  if (q === 'gcsTotal') return total != null ? { lo: total, hi: total } : { lo: e.lo + vb.lo + m.lo, hi: e.hi + vb.hi + m.hi };
  if (total == null) return m;
  return { lo: Math.max(m.lo, total - e.hi - vb.hi), hi: Math.min(m.hi, total - e.lo - vb.lo) };
}

const years = (x: ClinicalInput) => Math.floor(x.ageYears);

function flag(x: ClinicalInput, name: string): State {
  const v = x.vitals ?? {};
  let value: boolean | null | undefined;
  if (name === 'anticoagulant') value = x.anticoagulant;
  else if (name === 'headImpact') {
    value = x.fall.headImpact;
    if (value == null && (x.fall.firstImpact === 'head' || x.fall.firstImpact === 'face')) value = true;
  } else value = (v as Record<string, boolean | null | undefined>)[name];
  return value == null ? 'unknown' : value ? 'met' : 'not met';
}

export function oracle(c: Condition, x: ClinicalInput): State {
  switch (c.kind) {
    case 'below': {
      const r = range(x, c.quantity), t = c.value + (c.perYearOfAge ?? 0) * years(x);
      return r.hi < t ? 'met' : r.lo >= t ? 'not met' : 'unknown';
    }
    case 'above': {
      const r = range(x, c.quantity);
      return r.lo > c.value ? 'met' : r.hi <= c.value ? 'not met' : 'unknown';
    }
    case 'at-most': {
      const r = range(x, c.quantity);
      return r.hi <= c.value ? 'met' : r.lo > c.value ? 'not met' : 'unknown';
    }
    case 'exceeds': {
      const a = range(x, c.quantity), b = range(x, c.other);
      return a.lo > b.hi ? 'met' : a.hi <= b.lo ? 'not met' : 'unknown';
    }
    case 'age': return years(x) >= (c.from ?? -Infinity) && years(x) < (c.below ?? Infinity) ? 'met' : 'not met';
    case 'flag': return flag(x, c.flag);
    case 'finding': return (x.findings ?? []).includes(c.finding) ? 'met' : 'not met';
    case 'consideration': return (x.considerations ?? []).includes(c.consideration) ? 'met' : 'not met';
    case 'room-air-spo2-below': {
      // SOURCES.md §2.4: below on oxygen is below on room air; at or above on oxygen says nothing.
      const spo2 = x.vitals?.spo2;
      if (spo2 == null) return 'unknown';
      if (spo2 < c.value) return 'met';
      return x.vitals?.spo2RoomAir === true ? 'not met' : 'unknown';
    }
    case 'fall-above-body-heights': {
      // SOURCES.md §3.4 and §4: the recorded height, else the estimate from age under 15.
      const body = x.bodyHeightCm != null ? x.bodyHeightCm / 100 : years(x) < 15 ? estimateHeight(x.ageYears, x.sex ?? null)?.metres : undefined;
      if (body == null) return 'unknown';
      return x.fall.heightM > c.times * body ? 'met' : 'not met';
    }
    case 'pregnancy-above': {
      if (x.pregnancyWeeks != null) return x.pregnancyWeeks > c.weeks ? 'met' : 'not met';
      // SOURCES.md §2.6: not asked of a patient recorded male, or outside ages 10–59.
      return x.sex === 'male' || years(x) < 10 || years(x) >= 60 ? 'not met' : 'unknown';
    }
    case 'any': {
      const states = c.of.map((p) => oracle(p, x));
      return states.includes('met') ? 'met' : states.includes('unknown') ? 'unknown' : 'not met';
    }
    case 'all': {
      const states = c.of.map((p) => oracle(p, x));
      return states.includes('not met') ? 'not met' : states.includes('unknown') ? 'unknown' : 'met';
    }
  }
}

export const criterionState = (c: Criterion, x: ClinicalInput): State => oracle(c.when, x);
