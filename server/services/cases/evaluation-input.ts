import type { Knex } from 'knex';
import type { ClinicalInput } from '../../../shared/schemas/clinical';
import type { CriteriaSetId } from '../../../shared/triage/criteria';

// The part of a case's latest clinical input that the engine reads, kept compact in a narrow
// table beside the revisions (`case_evaluation_inputs`, one row per case), written with each
// revision in its transaction. A what-if over a year reads 100,000 of them: reading every
// revision's JSON (a few kB with the result) and parsing it took longer than evaluating each
// case twice, and even one column per value cost more than the evaluation (the driver makes a
// JavaScript value of every cell). So a row holds two text cells:
// - `numbers`: the measures and flags in the fixed order of NUMBER_SLOTS, joined by ",", empty
//   for "not recorded", flags as 0 or 1 (text, not a binary cell: a buffer per row cost the
//   reader more in garbage collection than the reading saved);
// - `words`: the criteria set, sex, surface, first impact, findings and considerations, joined
//   by "|" (lists by ","); few distinct texts recur across a hospital's cases, so a reader
//   splits each distinct text once.
// The order of NUMBER_SLOTS is part of the stored data: changing it needs a migration that
// rewrites the rows.

const NUMBER_SLOTS = [
  'ageYears', 'pregnancyWeeks', 'weightKg', 'bodyHeightCm', 'heightM', 'sbp', 'hr', 'rr', 'spo2',
  'gcsEye', 'gcsVerbal', 'gcsMotor', 'gcsTotal', 'gcsGiven',
  'anticoagulant', 'headImpact', 'spo2RoomAir', 'intubated', 'respiratorySupport', 'respiratoryDistress',
] as const;
const SLOT = Object.fromEntries(NUMBER_SLOTS.map((name, i) => [name, i])) as Record<(typeof NUMBER_SLOTS)[number], number>;

export interface EvaluationInputRow {
  case_id: number;
  revision: number;
  numbers: string;
  words: string;
}

const numberOf = (v: number | null | undefined): number => (v == null ? NaN : v);
const flagNumber = (v: boolean | null | undefined): number => (v == null ? NaN : v ? 1 : 0);

export function evaluationInputRow(caseId: number, revision: number, set: CriteriaSetId, input: ClinicalInput): EvaluationInputRow {
  const v = input.vitals;
  const gcs = v?.gcs;
  const values: Record<(typeof NUMBER_SLOTS)[number], number> = {
    ageYears: input.ageYears, pregnancyWeeks: numberOf(input.pregnancyWeeks), weightKg: numberOf(input.weightKg),
    bodyHeightCm: numberOf(input.bodyHeightCm), heightM: input.fall.heightM,
    sbp: numberOf(v?.sbp), hr: numberOf(v?.hr), rr: numberOf(v?.rr), spo2: numberOf(v?.spo2),
    gcsEye: numberOf(gcs?.eye), gcsVerbal: numberOf(gcs?.verbal), gcsMotor: numberOf(gcs?.motor), gcsTotal: numberOf(v?.gcsTotal),
    gcsGiven: gcs != null ? 1 : 0,
    anticoagulant: flagNumber(input.anticoagulant), headImpact: flagNumber(input.fall.headImpact), spo2RoomAir: flagNumber(v?.spo2RoomAir),
    intubated: flagNumber(v?.intubated), respiratorySupport: flagNumber(v?.respiratorySupport), respiratoryDistress: flagNumber(v?.respiratoryDistress),
  };
  const numbers = NUMBER_SLOTS.map((name) => (values[name] === values[name] ? String(values[name]) : '')).join(',');
  const words = [set, input.sex ?? '', input.fall.surface ?? '', input.fall.firstImpact ?? '', (input.findings ?? []).join(','), (input.considerations ?? []).join(',')].join('|');
  return { case_id: caseId, revision, numbers, words };
}

interface Words {
  set: CriteriaSetId;
  sex: ClinicalInput['sex'];
  surface: ClinicalInput['fall']['surface'];
  firstImpact: ClinicalInput['fall']['firstImpact'];
  findings: NonNullable<ClinicalInput['findings']>;
  considerations: NonNullable<ClinicalInput['considerations']>;
}

function wordsOf(text: string): Words {
  const [set, sex, surface, firstImpact, findings, considerations] = text.split('|');
  const list = (s: string | undefined) => (s ? s.split(',') : []);
  return {
    set: set as CriteriaSetId,
    sex: (sex || null) as Words['sex'],
    surface: (surface || null) as Words['surface'],
    firstImpact: (firstImpact || null) as Words['firstImpact'],
    findings: list(findings) as Words['findings'],
    considerations: list(considerations) as Words['considerations'],
  };
}

const ZERO = 48, NINE = 57, DOT = 46, COMMA = 44, MINUS = 45;

/**
 * Reads the `numbers` text into `out` (NaN where empty) without making a string per value: a run
 * reads 100,000 rows. Plain decimals are read digit by digit (digits / 10^decimals is the same
 * double as the text's when the digits are exact); anything longer or unusual goes to Number().
 */
function readNumbers(text: string, out: Float64Array): void {
  let slot = 0, start = 0;
  for (let i = 0; i <= text.length; i++) {
    if (i < text.length && text.charCodeAt(i) !== COMMA) continue;
    out[slot++] = numberIn(text, start, i);
    start = i + 1;
  }
  while (slot < out.length) out[slot++] = NaN;
}

function numberIn(text: string, from: number, to: number): number {
  if (from === to) return NaN;
  if (to - from > 15) return Number(text.slice(from, to));
  let digits = 0, decimals = -1, sign = 1, i = from;
  if (text.charCodeAt(i) === MINUS) {
    sign = -1;
    i++;
  }
  for (; i < to; i++) {
    const c = text.charCodeAt(i);
    if (c >= ZERO && c <= NINE) {
      digits = digits * 10 + (c - ZERO);
      if (decimals >= 0) decimals++;
    } else if (c === DOT && decimals < 0) decimals = 0;
    else return Number(text.slice(from, to));
  }
  return sign * (decimals > 0 ? digits / 10 ** decimals : digits);
}

const orNull = (x: number): number | null => (x === x ? x : null);
const flagOf = (x: number): boolean | null => (x === x ? x === 1 : null);

/** A ClinicalInput with every field the row holds, to be filled in place by `fill`. */
function scratchInput(): ClinicalInput {
  return {
    ageYears: 0, sex: null, pregnancyWeeks: null, anticoagulant: null, weightKg: null, bodyHeightCm: null,
    fall: { heightM: 0, surface: null, firstImpact: null, headImpact: null },
    vitals: {
      sbp: null, hr: null, rr: null, spo2: null, spo2RoomAir: null, gcs: null, gcsTotal: null,
      intubated: null, respiratorySupport: null, respiratoryDistress: null,
    },
    findings: [], considerations: [],
  };
}

function fill(input: ClinicalInput, v: Float64Array, w: Words, gcs: NonNullable<NonNullable<ClinicalInput['vitals']>['gcs']>): void {
  const fall = input.fall;
  const vitals = input.vitals!;
  input.ageYears = v[SLOT.ageYears];
  input.sex = w.sex;
  input.pregnancyWeeks = orNull(v[SLOT.pregnancyWeeks]);
  input.anticoagulant = flagOf(v[SLOT.anticoagulant]);
  input.weightKg = orNull(v[SLOT.weightKg]);
  input.bodyHeightCm = orNull(v[SLOT.bodyHeightCm]);
  fall.heightM = v[SLOT.heightM];
  fall.surface = w.surface;
  fall.firstImpact = w.firstImpact;
  fall.headImpact = flagOf(v[SLOT.headImpact]);
  vitals.sbp = orNull(v[SLOT.sbp]);
  vitals.hr = orNull(v[SLOT.hr]);
  vitals.rr = orNull(v[SLOT.rr]);
  vitals.spo2 = orNull(v[SLOT.spo2]);
  vitals.spo2RoomAir = flagOf(v[SLOT.spo2RoomAir]);
  gcs.eye = orNull(v[SLOT.gcsEye]);
  gcs.verbal = orNull(v[SLOT.gcsVerbal]);
  gcs.motor = orNull(v[SLOT.gcsMotor]);
  vitals.gcs = v[SLOT.gcsGiven] === 1 ? gcs : null;
  vitals.gcsTotal = orNull(v[SLOT.gcsTotal]);
  vitals.intubated = flagOf(v[SLOT.intubated]);
  vitals.respiratorySupport = flagOf(v[SLOT.respiratorySupport]);
  vitals.respiratoryDistress = flagOf(v[SLOT.respiratoryDistress]);
  input.findings = w.findings;
  input.considerations = w.considerations;
}

/**
 * Reads stored rows back into the engine's input (without the handover and the typed height's
 * unit, which the engine does not read). A reader fills one input object in place, valid until
 * its next call: a what-if evaluates each case and moves on, so 100,000 rows make no 100,000
 * objects to collect. It splits each distinct `words` text once; the lists are shared, read-only.
 */
export function evaluationInputReader(): (numbers: string, words: string) => { set: CriteriaSetId; input: ClinicalInput } {
  const seen = new Map<string, Words>();
  const values = new Float64Array(NUMBER_SLOTS.length);
  const read = { set: 'field-2021' as CriteriaSetId, input: scratchInput() };
  const gcs = { eye: null as number | null, verbal: null as number | null, motor: null as number | null };
  return (numbers, text) => {
    let w = seen.get(text);
    if (!w) seen.set(text, (w = wordsOf(text)));
    readNumbers(numbers, values);
    fill(read.input, values, w, gcs);
    read.set = w.set;
    return read;
  };
}

/** With each revision, in its transaction: the case's row now holds this revision's input. */
export async function storeEvaluationInput(db: Knex, caseId: number, revision: number, set: CriteriaSetId, input: ClinicalInput): Promise<void> {
  await db('case_evaluation_inputs').insert(evaluationInputRow(caseId, revision, set, input)).onConflict('case_id').merge();
}
