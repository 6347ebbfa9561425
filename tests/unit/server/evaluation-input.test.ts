import { describe, expect, it } from 'vitest';
import { evaluationInputReader, evaluationInputRow } from '../../../server/services/cases/evaluation-input';
import type { ClinicalInput } from '../../../shared/schemas/clinical';
import { evaluate } from '../../../shared/triage/evaluate';
import { EXAMPLE_POLICY } from '../../../shared/triage/policy';

// The compact copy of a case's input that a what-if reads must give the engine exactly what the
// revision gave it: every value, every "not recorded", every flag, read back and evaluated again.
// The patients are invented; the thresholds they sit beside are in shared/triage/SOURCES.md §2.

const through = (input: ClinicalInput, set: 'field-2021' | 'field-2011' = 'field-2021') => {
  const row = evaluationInputRow(7, 2, set, input);
  const read = evaluationInputReader()(row.numbers, row.words);
  // The reader fills one object in place; copy it before reading another.
  return { set: read.set, input: structuredClone(read.input) };
};

const full: ClinicalInput = {
  ageYears: 72.5, sex: 'female', pregnancyWeeks: null, anticoagulant: true, weightKg: 61.3, bodyHeightCm: null,
  // 15 ft as the crew typed it: 4.572 m.
  fall: { heightM: 4.572, surface: 'tile-stone', firstImpact: 'head', headImpact: null, entered: { value: 15, unit: 'ft' } },
  vitals: {
    sbp: 88, hr: 121, rr: 9, spo2: 89.5, spo2RoomAir: true, gcs: { eye: 3, verbal: null, motor: 5 }, gcsTotal: null,
    intubated: false, respiratorySupport: null, respiratoryDistress: true,
  },
  findings: ['skull-deformity', 'pelvic-fracture'], considerations: ['ems-concern'],
  handover: { allergies: 'none known' },
};

describe('the compact evaluation input', () => {
  it('reads back every value the engine reads, without the handover and the typed unit', () => {
    const { handover: _h, ...rest } = full;
    const { entered: _e, ...fall } = full.fall;
    expect(through(full)).toEqual({ set: 'field-2021', input: { ...rest, fall } });
  });

  it('keeps "not recorded" apart from no and zero: no vitals, no GCS, a total alone, a fall of 0 m', () => {
    const bare: ClinicalInput = { ageYears: 0.5, fall: { heightM: 0 } };
    const read = through(bare, 'field-2011');
    expect(read.set).toBe('field-2011');
    expect(read.input).toMatchObject({ ageYears: 0.5, sex: null, anticoagulant: null, fall: { heightM: 0, headImpact: null }, findings: [], considerations: [] });
    expect(read.input.vitals).toMatchObject({ sbp: null, gcs: null, gcsTotal: null, spo2RoomAir: null });
    const totalOnly = through({ ...bare, vitals: { gcsTotal: 13, sbp: 0, spo2RoomAir: false } });
    expect(totalOnly.input.vitals).toMatchObject({ gcs: null, gcsTotal: 13, sbp: 0, spo2RoomAir: false });
    const emptyGcs = through({ ...bare, vitals: { gcs: {} } });
    expect(emptyGcs.input.vitals?.gcs).toEqual({ eye: null, verbal: null, motor: null });
  });

  it('reads numbers the way the text wrote them, long decimals included', () => {
    for (const heightM of [0.1 + 0.2, 3 * 0.3048, 1e-7, 999.999, 12.192]) {
      expect(through({ ageYears: 40, fall: { heightM } }).input.fall.heightM).toBe(heightM);
    }
  });

  it('evaluates the same under the example policy: 72-year-old, 15 ft, SBP 88, GCS motor 5', () => {
    const again = evaluate(through(full).input, { policy: EXAMPLE_POLICY });
    const first = evaluate(full, { policy: EXAMPLE_POLICY });
    expect(again.activation).toBe(first.activation);
    expect(again.criteria).toEqual(first.criteria);
    expect(again.missing).toEqual(first.missing);
    expect(again.fieldRisk).toBe('high');
  });
});
