import { describe, expect, it } from 'vitest';
import { evaluate } from '../../../../shared/triage/evaluate';
import { patient } from './cases';

const ids2011 = (input: Parameters<typeof evaluate>[0]) =>
  evaluate(input, { set: 'field-2011' }).criteria.filter((c) => c.set === 'field-2011').map((c) => c.id);
const risk2011 = (input: Parameters<typeof evaluate>[0]) => evaluate(input, { set: 'field-2011' }).fieldRisk;

describe('2011 field triage (second set)', () => {
  it('GCS 13 is high risk, 14 is not; a partial GCS that cannot exceed 13 still counts', () => {
    // 2011 guideline, Sasser 2012: GCS ≤ 13 [source]
    expect(ids2011(patient({ vitals: { gcs: { eye: 3, verbal: 4, motor: 6 } } }))).toEqual(['field-2011:gcs-13-or-less']);
    expect(ids2011(patient({ vitals: { gcs: { eye: 4, verbal: 4, motor: 6 } } }))).toEqual([]);
    // eye 1 + verbal ≤ 5 + motor 6 = 12 at most [trade: GCS arithmetic]
    expect(ids2011(patient({ vitals: { gcs: { eye: 1, verbal: null, motor: 6 } } }))).toEqual(['field-2011:gcs-13-or-less']);
  });

  it('SBP 89 / 90 at any age', () => {
    // 2011 guideline, Sasser 2012: SBP < 90 [source]
    expect(ids2011(patient({ ageYears: 4, vitals: { sbp: 89 } }))).toEqual(['field-2011:sbp-below-90']);
    expect(ids2011(patient({ ageYears: 4, vitals: { sbp: 90 } }))).toEqual([]);
  });

  it('RR 9 / 10 and 29 / 30 from one year; RR 19 / 20 under one year', () => {
    // 2011 guideline, Sasser 2012: RR < 10 or > 29, < 20 in infants under 1 year [source]
    expect(ids2011(patient({ vitals: { rr: 9 } }))).toEqual(['field-2011:rr-out-of-range']);
    expect(ids2011(patient({ vitals: { rr: 10 } }))).toEqual([]);
    expect(ids2011(patient({ vitals: { rr: 29 } }))).toEqual([]);
    expect(ids2011(patient({ vitals: { rr: 30 } }))).toEqual(['field-2011:rr-out-of-range']);
    expect(ids2011(patient({ ageYears: 0.5, vitals: { rr: 19, sbp: 95 } }))).toEqual(['field-2011:rr-out-of-range']);
    expect(ids2011(patient({ ageYears: 0.5, vitals: { rr: 20, sbp: 95 } }))).toEqual([]);
    expect(ids2011(patient({ ageYears: 1, vitals: { rr: 19, sbp: 95 } }))).toEqual([]);
  });

  it('ventilatory support, paralysis and open skull fracture are step 1–2, high', () => {
    // 2011 guideline, Sasser 2012: need for ventilatory support; paralysis; open or depressed skull fracture [source]
    expect(ids2011(patient({ vitals: { respiratorySupport: true } }))).toEqual(['field-2011:ventilatory-support']);
    expect(ids2011(patient({ findings: ['spinal-injury-deficit'] }))).toEqual(['field-2011:paralysis']);
    expect(risk2011(patient({ findings: ['skull-deformity'] }))).toBe('high');
  });

  it('adult fall 20 ft is not enough, just over is; a 14-year-old counts from 10 ft', () => {
    // 2011 guideline, Sasser 2012: adults > 20 ft, children < 15 years > 10 ft, one storey = 10 ft [source]
    expect(ids2011(patient({ fall: { heightM: 6.096 } }))).toEqual([]);
    expect(ids2011(patient({ fall: { heightM: 6.097 } }))).toEqual(['field-2011:fall-adult-above-20-ft']);
    expect(ids2011(patient({ ageYears: 14, fall: { heightM: 3.048 } }))).toEqual([]);
    expect(ids2011(patient({ ageYears: 14, fall: { heightM: 3.049 } }))).toEqual(['field-2011:fall-child-above-10-ft']);
    expect(ids2011(patient({ ageYears: 15, fall: { heightM: 4 } }))).toEqual([]);
  });

  it('age 55 is not a special consideration, 56 is (risk rises after 55)', () => {
    // 2011 guideline, Sasser 2012: older adults, risk of injury or death increases after 55 [source]
    expect(risk2011(patient({ ageYears: 55 }))).toBe('none');
    expect(ids2011(patient({ ageYears: 56 }))).toEqual(['field-2011:age-above-55']);
  });

  it('68-year-old with SBP 105: step 4 shock warning (moderate), while 2021 calls it high', () => {
    // 2011 guideline, Sasser 2012: SBP < 110 may be shock after 65 [source]; 2021 guideline, Newgard 2022: SBP < 110 at ≥ 65 [source]
    const input = patient({ ageYears: 68, vitals: { sbp: 105 } });
    expect(ids2011(input)).toEqual(['field-2011:age-above-55', 'field-2011:sbp-below-110-age-65-up']);
    expect(risk2011(input)).toBe('moderate');
    expect(evaluate(input).fieldRisk).toBe('high');
  });

  it('the activation policy gives the same level whichever set is chosen', () => {
    // [ours]: the policy names its own criterion ids (SOURCES.md §6)
    const input = patient({ ageYears: 68, vitals: { sbp: 105 } });
    expect(evaluate(input, { set: 'field-2011' }).activation).toBe('limited');
    expect(evaluate(input, { set: 'field-2021' }).activation).toBe('limited');
  });
});
