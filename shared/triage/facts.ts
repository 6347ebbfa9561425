import type { ClinicalInput } from '../schemas/clinical';
import type { Sex } from '../schemas/clinical-options';
import { CONSIDERATIONS, FINDINGS } from '../schemas/clinical-options';
import type { Flag, Quantity } from './criteria';
import { estimateHeight } from './growth';

// The input read once per evaluation into flat numbers, so the criteria's closures compare without
// walking objects. NaN and UNKNOWN stand for "not recorded"; numbers carry a [lo, hi] range
// because a GCS known in part still bounds the total and the motor score.

export const NOT_MET = 0;
export const MET = 1;
export const UNKNOWN = 2;
export type TriState = typeof NOT_MET | typeof MET | typeof UNKNOWN;
/** For modules on the hot path to copy into their own scope (see compile-criteria.ts). */
export const TRI = { NOT_MET, MET, UNKNOWN } as const;

export const QUANTITY_INDEX: Record<Quantity, number> = { sbp: 0, hr: 1, rr: 2, heightM: 3, gcsTotal: 4, gcsMotor: 5 };
export const FLAG_INDEX: Record<Flag, number> = {
  anticoagulant: 0, intubated: 1, respiratorySupport: 2, respiratoryDistress: 3, headImpact: 4,
};
export const FINDING_BIT: Record<string, number> = Object.fromEntries(FINDINGS.map((f, i) => [f, 1 << i]));
export const CONSIDERATION_BIT: Record<string, number> = Object.fromEntries(CONSIDERATIONS.map((c, i) => [c, 1 << i]));

export interface Facts {
  ageYears: number;
  /** Completed years: the guideline's age bands and its 70 + 2 × age use whole years [ours]. */
  years: number;
  sex: Sex | null;
  lo: Float64Array;
  hi: Float64Array;
  eye: number;
  verbal: number;
  motor: number;
  gcsTotalRecorded: number;
  gcsRecorded: boolean;
  spo2: number;
  roomAir: TriState;
  pregnancyWeeks: number;
  bodyHeightCm: number;
  bodyHeightRead: boolean;
  /** The body height in metres, recorded or estimated; NaN when neither (read it with bodyHeightOf). */
  bodyHeightM: number;
  /** The growth reference an estimated body height came from; null when it was recorded or is unknown. */
  bodyHeightReference: string | null;
  flags: Uint8Array;
  findings: number;
  considerations: number;
}

export function createFacts(): Facts {
  return {
    ageYears: 0, years: 0, sex: null,
    lo: new Float64Array(6), hi: new Float64Array(6),
    eye: NaN, verbal: NaN, motor: NaN, gcsTotalRecorded: NaN, gcsRecorded: false,
    spo2: NaN, roomAir: UNKNOWN, pregnancyWeeks: NaN, bodyHeightCm: NaN, bodyHeightRead: false, bodyHeightM: NaN, bodyHeightReference: null,
    flags: new Uint8Array(5), findings: 0, considerations: 0,
  };
}

const num = (v: number | null | undefined): number => (v == null ? NaN : v);
const tri = (v: boolean | null | undefined): TriState => (v == null ? UNKNOWN : v ? MET : NOT_MET);

function setRange(f: Facts, q: number, v: number): void {
  if (v !== v) {
    f.lo[q] = -Infinity;
    f.hi[q] = Infinity;
  } else {
    f.lo[q] = v;
    f.hi[q] = v;
  }
}

export function readFacts(input: ClinicalInput, f: Facts): Facts {
  const vitals = input.vitals;
  const fall = input.fall;
  f.ageYears = input.ageYears;
  f.years = Math.floor(input.ageYears);
  f.sex = input.sex ?? null;
  setRange(f, 0, num(vitals?.sbp));
  setRange(f, 1, num(vitals?.hr));
  setRange(f, 2, num(vitals?.rr));
  setRange(f, 3, fall.heightM);

  const gcs = vitals?.gcs;
  f.eye = num(gcs?.eye);
  f.verbal = num(gcs?.verbal);
  f.motor = num(gcs?.motor);
  f.gcsTotalRecorded = num(vitals?.gcsTotal);
  f.gcsRecorded = gcs != null || f.gcsTotalRecorded === f.gcsTotalRecorded;
  // Ranges of the parts (eye 1–4, verbal 1–5, motor 1–6) bound the total and the motor score.
  const eLo = f.eye === f.eye ? f.eye : 1, eHi = f.eye === f.eye ? f.eye : 4;
  const vLo = f.verbal === f.verbal ? f.verbal : 1, vHi = f.verbal === f.verbal ? f.verbal : 5;
  let mLo = f.motor === f.motor ? f.motor : 1, mHi = f.motor === f.motor ? f.motor : 6;
  let tLo = eLo + vLo + mLo, tHi = eHi + vHi + mHi;
  const t = f.gcsTotalRecorded;
  if (t === t) {
    tLo = t;
    tHi = t;
    mLo = Math.max(mLo, t - eHi - vHi);
    mHi = Math.min(mHi, t - eLo - vLo);
  }
  f.lo[4] = tLo; f.hi[4] = tHi;
  f.lo[5] = mLo; f.hi[5] = mHi;

  f.spo2 = num(vitals?.spo2);
  f.roomAir = tri(vitals?.spo2RoomAir);
  f.pregnancyWeeks = num(input.pregnancyWeeks);
  // The child's height is read only when a criterion asks (bodyHeightOf).
  f.bodyHeightCm = num(input.bodyHeightCm);
  f.bodyHeightRead = false;
  f.flags[0] = tri(input.anticoagulant);
  f.flags[1] = tri(vitals?.intubated);
  f.flags[2] = tri(vitals?.respiratorySupport);
  f.flags[3] = tri(vitals?.respiratoryDistress);
  // A first impact on the head or face is a head impact when the crew left the question open [ours].
  const firstImpact = fall.firstImpact;
  f.flags[4] = fall.headImpact != null ? tri(fall.headImpact) : firstImpact === 'head' || firstImpact === 'face' ? MET : UNKNOWN;

  let bits = 0;
  const findings = input.findings;
  if (findings) for (let i = 0; i < findings.length; i++) bits |= FINDING_BIT[findings[i]] ?? 0;
  f.findings = bits;
  bits = 0;
  const considerations = input.considerations;
  if (considerations) for (let i = 0; i < considerations.length; i++) bits |= CONSIDERATION_BIT[considerations[i]] ?? 0;
  f.considerations = bits;
  return f;
}

/** The child's height as recorded; else, under 15, estimated from age (SOURCES.md §4); NaN when neither. */
export function bodyHeightOf(f: Facts): number {
  if (f.bodyHeightRead) return f.bodyHeightM;
  f.bodyHeightRead = true;
  if (f.bodyHeightCm === f.bodyHeightCm) {
    f.bodyHeightM = f.bodyHeightCm / 100;
    f.bodyHeightReference = null;
  } else {
    const estimate = f.years < 15 ? estimateHeight(f.ageYears, f.sex) : null;
    f.bodyHeightM = estimate ? estimate.metres : NaN;
    f.bodyHeightReference = estimate ? estimate.reference : null;
  }
  return f.bodyHeightM;
}
