import { describe, expect, it } from 'vitest';
import { clockToMs, draftFromInput, emptyDraft, toClinical, type ClinicalDraft } from '../../../src/forms/clinical-draft';

// The crew's form as typed, turned into the shared clinical input (toClinical), and back.

const draft = (over: Partial<ClinicalDraft>): ClinicalDraft => ({ ...emptyDraft('m'), age: '40', height: '3', ...over });

describe('toClinical', () => {
  it('turns feet and storeys into metres, keeping what was typed beside them', () => {
    // 1 ft = 0.3048 m exactly (the international foot); one storey counted as 10 ft
    // (SOURCES.md §3.4, the 2011 guideline's reading of a storey).
    const feet = toClinical(draft({ height: '10', heightUnit: 'ft' }));
    expect(feet.input?.fall.heightM).toBe(3.048);
    expect(feet.input?.fall.entered).toEqual({ value: 10, unit: 'ft' });
    const storeys = toClinical(draft({ height: '2', heightUnit: 'storeys' }));
    expect(storeys.input?.fall.heightM).toBe(6.096);
  });

  it('reads a comma as a decimal point, as many keypads type it', () => {
    expect(toClinical(draft({ height: '4,5' })).input?.fall.heightM).toBe(4.5);
  });

  it('takes an infant age in months as a fraction of a year', () => {
    expect(toClinical(draft({ age: '6', ageUnit: 'months' })).input?.ageYears).toBe(0.5);
    const tooMany = toClinical(draft({ age: '40', ageUnit: 'months' }));
    expect(tooMany.input).toBeNull();
    expect(tooMany.errors.age).toMatch(/between 0 and 36/);
  });

  it('names the field the crew can see when something is missing or not a number', () => {
    const built = toClinical(draft({ age: '', sbp: 'abc' }));
    expect(built.input).toBeNull();
    expect(built.errors).toMatchObject({ age: expect.stringMatching(/required/), sbp: 'must be a number' });
    expect(built.issues.map((i) => i.field)).toEqual(expect.arrayContaining(['Age', 'Systolic BP (SBP)']));
  });

  it('leaves a value the crew did not give as not known, never as normal', () => {
    const input = toClinical(draft({})).input!;
    expect(input.vitals).toMatchObject({ sbp: null, hr: null, gcs: null, gcsTotal: null, spo2RoomAir: null });
    // GCS parts: a partial set is sent as given, and the schema keeps the missing part unknown.
    const partial = toClinical(draft({ gcsEye: 4, gcsVerbal: 5 })).input!;
    expect(partial.vitals?.gcs).toEqual({ eye: 4, verbal: 5, motor: null });
  });

  it('does not ask a male patient about pregnancy', () => {
    expect(toClinical(draft({ sex: 'male', pregnant: true, pregnancyWeeks: '20' })).input?.pregnancyWeeks).toBeNull();
    expect(toClinical(draft({ sex: 'female', pregnant: false })).input?.pregnancyWeeks).toBe(0);
  });

  it('round-trips through the form for an update, with the height as the crew typed it', () => {
    const input = toClinical(draft({ height: '10', heightUnit: 'ft', hr: '110', handover: { injuredAt: '', anticoagulantName: 'apixaban', lastDoseAt: '', treatments: ['splint'], allergies: '' } })).input!;
    const back = draftFromInput(input, 'm');
    expect(back).toMatchObject({ height: '10', heightUnit: 'ft', hr: '110' });
    expect(toClinical(back).input).toEqual(input);
  });
});

describe('clockToMs', () => {
  it('reads a clock time as its most recent moment, yesterday just after midnight', () => {
    const now = new Date(2026, 11, 4, 0, 10).getTime();
    expect(clockToMs('23:50', now)).toBe(new Date(2026, 11, 3, 23, 50).getTime());
    expect(clockToMs('00:05', now)).toBe(new Date(2026, 11, 4, 0, 5).getTime());
    expect(clockToMs('', now)).toBeNull();
    expect(clockToMs('25:00', now)).toBeNaN();
  });
});
