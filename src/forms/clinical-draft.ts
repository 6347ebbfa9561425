// The form's own shape: numbers as typed text (empty means not known), yes/no/not-known as
// true/false/null. It becomes the shared ClinicalInput only through toClinical, which the same
// schema as the server's then checks.
import { ClinicalInput, type Consideration, type Finding, type FirstImpactRegion, type Handover, type Sex, type Surface, type Treatment } from '@shared/schemas/clinical';
import { describeIssues, type FieldIssue } from '@shared/schemas/issues';
import { feetToMetres, gcsTotalOf, metresToFeet, storeysToMetres, FEET_PER_STOREY } from '@shared/schemas/units';

export type Tri = boolean | null;
export type HeightUnit = 'm' | 'ft' | 'storeys';

/** The handover part as typed: clock times as "HH:MM", text as typed; empty means not known. */
export interface HandoverDraft {
  injuredAt: string;
  anticoagulantName: string;
  lastDoseAt: string;
  treatments: Treatment[];
  allergies: string;
}

export const emptyHandover = (): HandoverDraft => ({ injuredAt: '', anticoagulantName: '', lastDoseAt: '', treatments: [], allergies: '' });

export interface ClinicalDraft {
  age: string;
  ageUnit: 'years' | 'months';
  sex: Sex;
  pregnant: Tri;
  pregnancyWeeks: string;
  anticoagulant: Tri;
  weightKg: string;
  /** The child's own height in cm, for the 2011 children's fall rule (SOURCES.md §3.4). */
  bodyHeightCm: string;
  height: string;
  heightUnit: HeightUnit;
  surface: Surface;
  firstImpact: FirstImpactRegion;
  headImpact: Tri;
  sbp: string;
  hr: string;
  rr: string;
  spo2: string;
  spo2RoomAir: Tri;
  gcsMode: 'parts' | 'total';
  gcsEye: number | null;
  gcsVerbal: number | null;
  gcsMotor: number | null;
  gcsTotal: string;
  intubated: Tri;
  respiratorySupport: Tri;
  respiratoryDistress: Tri;
  findings: Finding[];
  considerations: Consideration[];
  handover: HandoverDraft;
}

export function emptyDraft(heightUnit: HeightUnit = 'm'): ClinicalDraft {
  return {
    age: '', ageUnit: 'years', sex: 'unknown', pregnant: null, pregnancyWeeks: '', anticoagulant: null, weightKg: '', bodyHeightCm: '',
    height: '', heightUnit, surface: 'unknown', firstImpact: 'unknown', headImpact: null,
    sbp: '', hr: '', rr: '', spo2: '', spo2RoomAir: null,
    gcsMode: 'parts', gcsEye: null, gcsVerbal: null, gcsMotor: null, gcsTotal: '',
    intubated: null, respiratorySupport: null, respiratoryDistress: null,
    findings: [], considerations: [], handover: emptyHandover(),
  };
}

/** The visible label of each input, so a message names the field the paramedic can see. */
export const FIELD_LABELS: Record<string, string> = {
  ageYears: 'Age',
  sex: 'Sex',
  pregnancyWeeks: 'Weeks pregnant',
  anticoagulant: 'Anticoagulants',
  weightKg: 'Weight',
  bodyHeightCm: "Child's height",
  'fall.heightM': 'Fall height',
  'fall.surface': 'Landing surface',
  'fall.firstImpact': 'Struck first',
  'fall.headImpact': 'Head struck',
  'vitals.sbp': 'Systolic BP (SBP)',
  'vitals.hr': 'Heart rate (HR)',
  'vitals.rr': 'Respiratory rate (RR)',
  'vitals.spo2': 'SpO2',
  'vitals.spo2RoomAir': 'SpO2 on room air',
  'vitals.gcs.eye': 'GCS eye',
  'vitals.gcs.verbal': 'GCS verbal',
  'vitals.gcs.motor': 'GCS motor',
  'vitals.gcsTotal': 'GCS total',
  'vitals.intubated': 'Intubated',
  'vitals.respiratorySupport': 'Breathing support',
  'vitals.respiratoryDistress': 'Respiratory distress',
  findings: 'Injuries found',
  considerations: 'Special considerations',
  'handover.injuredAt': 'Time of injury',
  'handover.anticoagulantName': 'Anticoagulant name',
  'handover.anticoagulantLastDoseAt': 'Last dose',
  'handover.treatments': 'Treatment given',
  'handover.allergies': 'Allergies',
};

/** Which input shows a schema path's message. */
const INPUT_OF: Record<string, keyof ClinicalDraft> = {
  ageYears: 'age', pregnancyWeeks: 'pregnancyWeeks', weightKg: 'weightKg', bodyHeightCm: 'bodyHeightCm', 'fall.heightM': 'height',
  'vitals.sbp': 'sbp', 'vitals.hr': 'hr', 'vitals.rr': 'rr', 'vitals.spo2': 'spo2',
  'vitals.gcs.eye': 'gcsEye', 'vitals.gcs.verbal': 'gcsVerbal', 'vitals.gcs.motor': 'gcsMotor', 'vitals.gcsTotal': 'gcsTotal',
};

export type DraftErrors = Partial<Record<keyof ClinicalDraft, string>>;

export interface BuiltClinical {
  /** Set when the whole clinical part passes the shared schema. */
  input: ClinicalInput | null;
  /** Per form input, the message to show beside it ("must be at most 300"). */
  errors: DraftErrors;
  /** Every problem, each naming its field by its label ("Systolic BP (SBP) must be at most 300"). */
  issues: FieldIssue[];
}

const NOT_A_NUMBER = Symbol('not a number');

/**
 * "HH:MM" as the most recent such moment (a few minutes ahead allowed for a device's drift): an
 * injury at 23:50 reported at 00:10 was yesterday's. Null when empty, NaN when not a time.
 */
export function clockToMs(text: string, now: number = Date.now()): number | null {
  const match = /^(\d{1,2}):(\d{2})$/.exec(text.trim());
  if (text.trim() === '') return null;
  if (!match || Number(match[1]) > 23 || Number(match[2]) > 59) return Number.NaN;
  const at = new Date(now);
  at.setHours(Number(match[1]), Number(match[2]), 0, 0);
  if (at.getTime() > now + 10 * 60_000) at.setDate(at.getDate() - 1);
  return at.getTime();
}

export function msToClock(at: number | null | undefined): string {
  if (at == null) return '';
  const d = new Date(at);
  return `${String(d.getHours()).padStart(2, '0')}:${String(d.getMinutes()).padStart(2, '0')}`;
}

function handoverOf(draft: HandoverDraft, fail: (path: string, message: string) => void): Handover | null {
  const time = (path: string, text: string) => {
    const at = clockToMs(text);
    if (at !== null && Number.isNaN(at)) {
      fail(path, 'must be a time such as 14:05');
      return null;
    }
    return at;
  };
  const text = (value: string) => (value.trim() === '' ? null : value.trim());
  const handover = {
    injuredAt: time('handover.injuredAt', draft.injuredAt),
    anticoagulantName: text(draft.anticoagulantName),
    anticoagulantLastDoseAt: time('handover.anticoagulantLastDoseAt', draft.lastDoseAt),
    treatments: [...draft.treatments],
    allergies: text(draft.allergies),
  };
  const empty = handover.injuredAt === null && handover.anticoagulantName === null && handover.anticoagulantLastDoseAt === null && !handover.treatments.length && handover.allergies === null;
  return empty ? null : handover;
}

// Commas are decimal points on many keypads; anything else that is not a number is reported.
function parseNumber(text: string): number | null | typeof NOT_A_NUMBER {
  const trimmed = text.trim().replace(',', '.');
  if (trimmed === '') return null;
  const value = Number(trimmed);
  return Number.isFinite(value) ? value : NOT_A_NUMBER;
}

/** Metres to three decimals: 10 ft gives exactly 3.048, the guideline's threshold. */
export function heightInMetres(value: number, unit: HeightUnit): number {
  if (unit === 'ft') return feetToMetres(value);
  if (unit === 'storeys') return storeysToMetres(value);
  return value;
}

export function heightFromMetres(metres: number, unit: HeightUnit): number {
  if (unit === 'ft') return Math.round(metresToFeet(metres) * 10) / 10;
  if (unit === 'storeys') return Math.round((metresToFeet(metres) / FEET_PER_STOREY) * 10) / 10;
  return metres;
}

/** Asked where the engine's pregnancy criterion can apply: not male, age 10–59 [ours]. */
/** A child's height is asked under 15 years, where the 2011 fall rule uses it (SOURCES.md §3.4). */
export function childHeightAsked(draft: ClinicalDraft): boolean {
  const age = parseNumber(draft.age);
  return typeof age === 'number' && (draft.ageUnit === 'months' || age < 15);
}

export function pregnancyAsked(draft: ClinicalDraft): boolean {
  if (draft.sex === 'male') return false;
  const age = parseNumber(draft.age);
  if (typeof age !== 'number') return true;
  const years = draft.ageUnit === 'months' ? age / 12 : age;
  return years >= 10 && years < 60;
}

export function toClinical(draft: ClinicalDraft): BuiltClinical {
  const errors: DraftErrors = {};
  const issues: FieldIssue[] = [];
  const fail = (path: string, message: string) => {
    const input = INPUT_OF[path];
    if (input && !errors[input]) errors[input] = message;
    issues.push({ field: FIELD_LABELS[path] ?? path, message });
  };
  const read = (path: string, text: string): number | null => {
    const value = parseNumber(text);
    if (value === NOT_A_NUMBER) {
      fail(path, 'must be a number');
      return null;
    }
    return value;
  };

  const ageValue = read('ageYears', draft.age);
  let ageYears: number | undefined;
  if (ageValue === null) {
    if (!errors.age) fail('ageYears', draft.ageUnit === 'months' ? 'is required (months, for an infant)' : 'is required (years; switch to months for an infant)');
  } else if (draft.ageUnit === 'months') {
    if (ageValue < 0 || ageValue > 36) fail('ageYears', 'in months must be between 0 and 36; use years above that');
    else ageYears = Math.round((ageValue / 12) * 1000) / 1000;
  } else ageYears = ageValue;

  const heightValue = read('fall.heightM', draft.height);
  let heightM: number | undefined;
  if (heightValue === null) {
    if (!errors.height) fail('fall.heightM', 'is required (0 for a fall from standing)');
  } else heightM = heightInMetres(heightValue, draft.heightUnit);

  // Kept exactly as typed, beside the metres: an update shows this figure, not a conversion back.
  const entered = heightValue === null ? null : { value: heightValue, unit: draft.heightUnit };
  const handover = handoverOf(draft.handover ?? emptyHandover(), fail);

  const weeks = draft.pregnant === true ? read('pregnancyWeeks', draft.pregnancyWeeks) : null;
  const gcs = draft.gcsMode === 'parts' ? { eye: draft.gcsEye, verbal: draft.gcsVerbal, motor: draft.gcsMotor } : null;
  const anyGcsPart = gcs !== null && (gcs.eye !== null || gcs.verbal !== null || gcs.motor !== null);

  const candidate = {
    ageYears,
    sex: draft.sex,
    // Not pregnant is 0 weeks; pregnant with the weeks not known stays unknown.
    pregnancyWeeks: !pregnancyAsked(draft) ? null : draft.pregnant === false ? 0 : weeks,
    anticoagulant: draft.anticoagulant,
    weightKg: read('weightKg', draft.weightKg),
    bodyHeightCm: childHeightAsked(draft) ? read('bodyHeightCm', draft.bodyHeightCm) : null,
    fall: { heightM, surface: draft.surface, firstImpact: draft.firstImpact, headImpact: draft.headImpact, entered },
    vitals: {
      sbp: read('vitals.sbp', draft.sbp),
      hr: read('vitals.hr', draft.hr),
      rr: read('vitals.rr', draft.rr),
      spo2: read('vitals.spo2', draft.spo2),
      spo2RoomAir: draft.spo2RoomAir,
      gcs: anyGcsPart ? gcs : null,
      gcsTotal: draft.gcsMode === 'total' ? read('vitals.gcsTotal', draft.gcsTotal) : null,
      intubated: draft.intubated,
      respiratorySupport: draft.respiratorySupport,
      respiratoryDistress: draft.respiratoryDistress,
    },
    findings: [...draft.findings],
    considerations: [...draft.considerations],
    ...(handover ? { handover } : {}),
  };

  const parsed = ClinicalInput.safeParse(candidate);
  if (!parsed.success) {
    for (const issue of describeIssues(parsed.error)) {
      // Already reported in the form's words (required, not a number).
      if (issue.field === 'ageYears' && ageYears === undefined) continue;
      if (issue.field === 'fall.heightM' && heightM === undefined) continue;
      fail(issue.field, issue.message);
    }
  }
  const ok = parsed.success && issues.length === 0;
  return { input: ok ? parsed.data : null, errors, issues };
}

/** Back from a stored revision into the form, for an update en route. */
export function draftFromInput(input: ClinicalInput, heightUnit: HeightUnit): ClinicalDraft {
  const vitals = input.vitals ?? {};
  const infant = input.ageYears < 2 && !Number.isInteger(input.ageYears);
  const text = (v: number | null | undefined) => (v == null ? '' : String(v));
  return {
    ...emptyDraft(heightUnit),
    age: infant ? String(Math.round(input.ageYears * 12)) : String(input.ageYears),
    ageUnit: infant ? 'months' : 'years',
    sex: input.sex ?? 'unknown',
    pregnant: input.pregnancyWeeks == null ? null : input.pregnancyWeeks > 0,
    pregnancyWeeks: input.pregnancyWeeks ? String(input.pregnancyWeeks) : '',
    anticoagulant: input.anticoagulant ?? null,
    weightKg: text(input.weightKg),
    bodyHeightCm: text(input.bodyHeightCm),
    height: input.fall.entered ? String(input.fall.entered.value) : String(heightFromMetres(input.fall.heightM, heightUnit)),
    heightUnit: input.fall.entered?.unit ?? heightUnit,
    surface: input.fall.surface ?? 'unknown',
    firstImpact: input.fall.firstImpact ?? 'unknown',
    headImpact: input.fall.headImpact ?? null,
    sbp: text(vitals.sbp), hr: text(vitals.hr), rr: text(vitals.rr), spo2: text(vitals.spo2),
    spo2RoomAir: vitals.spo2RoomAir ?? null,
    gcsMode: vitals.gcs == null && vitals.gcsTotal != null ? 'total' : 'parts',
    gcsEye: vitals.gcs?.eye ?? null, gcsVerbal: vitals.gcs?.verbal ?? null, gcsMotor: vitals.gcs?.motor ?? null,
    gcsTotal: text(vitals.gcsTotal),
    intubated: vitals.intubated ?? null,
    respiratorySupport: vitals.respiratorySupport ?? null,
    respiratoryDistress: vitals.respiratoryDistress ?? null,
    findings: [...(input.findings ?? [])],
    considerations: [...(input.considerations ?? [])],
    handover: {
      injuredAt: msToClock(input.handover?.injuredAt),
      anticoagulantName: input.handover?.anticoagulantName ?? '',
      lastDoseAt: msToClock(input.handover?.anticoagulantLastDoseAt),
      treatments: [...(input.handover?.treatments ?? [])],
      allergies: input.handover?.allergies ?? '',
    },
  };
}

export function gcsSum(draft: ClinicalDraft): number | null {
  return gcsTotalOf({ eye: draft.gcsEye, verbal: draft.gcsVerbal, motor: draft.gcsMotor });
}

/** One line for the outbox and the case list: "34 y, fell 4.3 m". */
export function describePatient(input: ClinicalInput): string {
  const age = input.ageYears < 2 && !Number.isInteger(input.ageYears) ? `${Math.round(input.ageYears * 12)} months` : `${input.ageYears} y`;
  const fall = input.fall.heightM === 0 ? 'fall from standing' : `fell ${Math.round(input.fall.heightM * 10) / 10} m`;
  return `${age}, ${fall}`;
}
