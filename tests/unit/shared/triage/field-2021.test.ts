import { describe, expect, it } from 'vitest';
import { evaluate } from '../../../../shared/triage/evaluate';
import { feetToMetres } from '../../../../shared/schemas/units';
import { patient } from './cases';

const ids = (input: Parameters<typeof evaluate>[0]) => evaluate(input).criteria.filter((c) => c.set === 'field-2021').map((c) => c.id);
const risk = (input: Parameters<typeof evaluate>[0]) => evaluate(input).fieldRisk;

describe('2021 field triage: vital signs at their thresholds', () => {
  it('adult 34, SBP 89 / 90 / 91', () => {
    // 2021 guideline, Newgard 2022: SBP < 90 at age 10–64 [source]
    expect(ids(patient({ ageYears: 34, vitals: { sbp: 89 } }))).toContain('field-2021:sbp-below-90-age-10-64');
    expect(ids(patient({ ageYears: 34, vitals: { sbp: 90 } }))).not.toContain('field-2021:sbp-below-90-age-10-64');
    expect(risk(patient({ ageYears: 34, vitals: { sbp: 91 } }))).toBe('none');
  });

  it('explains the fired SBP with the recorded value and the age band', () => {
    // 2021 guideline, Newgard 2022: SBP < 90 at 10–64 [source]
    const fired = evaluate(patient({ ageYears: 34, vitals: { sbp: 84 } })).criteria.find((c) => c.id === 'field-2021:sbp-below-90-age-10-64');
    expect(fired?.because).toBe('SBP 84 < 90, age 34 (10–64)');
    expect(fired?.source).toMatch(/Newgard/);
  });

  it('72-year-old, SBP 109 / 110 / 111', () => {
    // 2021 guideline, Newgard 2022: SBP < 110 at age ≥ 65 [source]
    expect(ids(patient({ ageYears: 72, vitals: { sbp: 109 } }))).toContain('field-2021:sbp-below-110-age-65-up');
    expect(ids(patient({ ageYears: 72, vitals: { sbp: 110 } }))).not.toContain('field-2021:sbp-below-110-age-65-up');
    expect(ids(patient({ ageYears: 72, vitals: { sbp: 111 } }))).not.toContain('field-2021:sbp-below-110-age-65-up');
  });

  it('ages 64 and 65 with SBP 100: the older band alone calls it low', () => {
    // 2021 guideline, Newgard 2022: bands 10–64 (SBP < 90) and ≥ 65 (SBP < 110) [source]
    expect(risk(patient({ ageYears: 64, vitals: { sbp: 100 } }))).toBe('none');
    expect(risk(patient({ ageYears: 65, vitals: { sbp: 100 } }))).toBe('high');
  });

  it('4-year-old: SBP 77 / 78 / 79 against 70 + 2 × 4 = 78', () => {
    // 2021 guideline, Newgard 2022: age 0–9, SBP < 70 + 2 × age [source]
    expect(ids(patient({ ageYears: 4, vitals: { sbp: 77 } }))).toEqual(['field-2021:sbp-low-age-0-9']);
    expect(ids(patient({ ageYears: 4, vitals: { sbp: 78 } }))).toEqual([]);
    expect(ids(patient({ ageYears: 4, vitals: { sbp: 79 } }))).toEqual([]);
    expect(evaluate(patient({ ageYears: 4, vitals: { sbp: 72 } })).criteria[0].because).toBe('SBP 72 < 78 (70 + 2 × 4), age 4 (0–9)');
  });

  it('ages 9 and 10 with SBP 85: the child formula (88) until the tenth birthday, then < 90', () => {
    // 2021 guideline, Newgard 2022: 0–9 uses 70 + 2 × age (= 88 at 9), 10–64 uses 90 [source]
    expect(ids(patient({ ageYears: 9, vitals: { sbp: 85, hr: 80 } }))).toEqual(['field-2021:sbp-low-age-0-9']);
    expect(ids(patient({ ageYears: 10, vitals: { sbp: 85, hr: 80 } }))).toEqual(['field-2021:sbp-below-90-age-10-64']);
  });

  it('infant of 6 months: 70 + 2 × 0 = 70 in completed years', () => {
    // 2021 guideline, Newgard 2022: 70 + 2 × age [source]; completed years [ours]
    expect(ids(patient({ ageYears: 0.5, vitals: { sbp: 69, hr: 140, rr: 28 } }))).toEqual(['field-2021:sbp-low-age-0-9']);
    expect(ids(patient({ ageYears: 0.5, vitals: { sbp: 70, hr: 140, rr: 28 } }))).toEqual([]);
  });

  it('HR above SBP counts from age 10, not at 9', () => {
    // 2021 guideline, Newgard 2022: HR > SBP at ages 10–64 and ≥ 65 only [source]
    expect(ids(patient({ ageYears: 9, vitals: { sbp: 100, hr: 101 } }))).toEqual([]);
    expect(ids(patient({ ageYears: 10, vitals: { sbp: 100, hr: 101 } }))).toEqual(['field-2021:hr-above-sbp-age-10-up']);
    expect(ids(patient({ ageYears: 10, vitals: { sbp: 100, hr: 100 } }))).toEqual([]);
    expect(ids(patient({ ageYears: 80, vitals: { sbp: 120, hr: 121 } }))).toEqual(['field-2021:hr-above-sbp-age-10-up']);
  });

  it('respiratory rate 9 / 10 / 11 and 28 / 29 / 30', () => {
    // 2021 guideline, Newgard 2022: RR < 10 or > 29 [source]
    expect(ids(patient({ vitals: { rr: 9 } }))).toEqual(['field-2021:rr-out-of-range']);
    expect(ids(patient({ vitals: { rr: 10 } }))).toEqual([]);
    expect(ids(patient({ vitals: { rr: 11 } }))).toEqual([]);
    expect(ids(patient({ vitals: { rr: 28 } }))).toEqual([]);
    expect(ids(patient({ vitals: { rr: 29 } }))).toEqual([]);
    expect(ids(patient({ vitals: { rr: 30 } }))).toEqual(['field-2021:rr-out-of-range']);
  });

  it('room-air SpO2 89 / 90 / 91', () => {
    // 2021 guideline, Newgard 2022: room-air pulse oximetry < 90 % (SOURCES.md §2.4) [sourced]
    expect(ids(patient({ vitals: { spo2: 89 } }))).toEqual(['field-2021:room-air-spo2-below-90']);
    expect(ids(patient({ vitals: { spo2: 90 } }))).toEqual([]);
    expect(ids(patient({ vitals: { spo2: 91 } }))).toEqual([]);
  });

  it('SpO2 89 on oxygen: met, room air would read lower still', () => {
    // Room-air SpO2 < 90 % [sourced: Newgard 2022]; below 90 on oxygen meets it (SOURCES.md §2.4) [ours]
    const result = evaluate(patient({ vitals: { spo2: 89, spo2RoomAir: false } }));
    expect(result.criteria.map((c) => c.id)).toContain('field-2021:room-air-spo2-below-90');
    expect(result.fieldRisk).toBe('high');
    expect(result.criteria.find((c) => c.id === 'field-2021:room-air-spo2-below-90')?.because)
      .toBe('SpO2 89 % on oxygen < 90 %, so lower still on room air');
  });

  it('SpO2 90 and 96 on oxygen: unknown, the room-air SpO2 listed as missing', () => {
    // At or above 90 % on oxygen says nothing of room air (SOURCES.md §2.4) [ours]
    for (const spo2 of [90, 96]) {
      const result = evaluate(patient({ vitals: { spo2, spo2RoomAir: false } }));
      expect(result.fieldRisk).toBe('none');
      expect(result.missing).toContainEqual({ field: 'vitals.spo2', message: 'no room-air SpO2 recorded (a reading of 90 % or more on oxygen cannot show it)' });
    }
    // The same 90 % on room air decides it: not met, nothing missing for it [sourced: Newgard 2022].
    expect(evaluate(patient({ vitals: { spo2: 90, spo2RoomAir: true } })).missing.map((m) => m.field)).not.toContain('vitals.spo2');
  });

  it('SpO2 85 with room air not recorded: met either way', () => {
    // Below 90 on room air meets it [sourced: Newgard 2022]; below 90 on oxygen too (SOURCES.md §2.4) [ours]
    const result = evaluate(patient({ vitals: { spo2: 85, spo2RoomAir: null } }));
    expect(result.fieldRisk).toBe('high');
    expect(result.criteria.map((c) => c.id)).toContain('field-2021:room-air-spo2-below-90');
  });

  it('SpO2 95 with room air not recorded: unknown, and said so', () => {
    // SOURCES.md §2.4 [ours]: whether it was room air decides it.
    const result = evaluate(patient({ vitals: { spo2: 95, spo2RoomAir: null } }));
    expect(result.fieldRisk).toBe('none');
    expect(result.missing.map((m) => m.field)).toEqual(['vitals.spo2RoomAir']);
  });

  it('motor GCS 5 / 6; a total of 15 means motor 6; a total of 14 leaves motor unknown', () => {
    // 2021 guideline, Newgard 2022: unable to follow commands, motor GCS < 6 [source]
    expect(ids(patient({ vitals: { gcs: { eye: 4, verbal: 5, motor: 5 } } }))).toEqual(['field-2021:motor-gcs-below-6']);
    expect(ids(patient({ vitals: { gcs: { eye: 4, verbal: 5, motor: 6 } } }))).toEqual([]);
    expect(ids(patient({ vitals: { gcs: null, gcsTotal: 15 } }))).toEqual([]);
    const total14 = evaluate(patient({ vitals: { gcs: null, gcsTotal: 14 } }));
    expect(total14.fieldRisk).toBe('none');
    expect(total14.missing).toEqual([{ field: 'vitals.gcs.motor', message: 'no GCS motor score recorded (a total alone cannot show it)' }]);
  });

  it('a GCS total of 7 cannot have motor 6 (eye 4 + verbal 5 = 9 at most)', () => {
    // 2021 guideline, Newgard 2022: motor GCS < 6 [source]; arithmetic of the GCS parts [trade]
    const fired = evaluate(patient({ vitals: { gcs: null, gcsTotal: 7 } })).criteria.find((c) => c.id === 'field-2021:motor-gcs-below-6');
    expect(fired?.because).toBe('motor GCS at most 5 (GCS total 7) < 6');
  });

  it('intubated, on support or in distress each call high risk', () => {
    // 2021 guideline, Newgard 2022: respiratory distress or need for respiratory support [source]
    expect(ids(patient({ vitals: { intubated: true } }))).toEqual(['field-2021:respiratory-distress-or-support']);
    expect(ids(patient({ vitals: { respiratorySupport: true } }))).toEqual(['field-2021:respiratory-distress-or-support']);
    expect(ids(patient({ vitals: { respiratoryDistress: true } }))).toEqual(['field-2021:respiratory-distress-or-support']);
  });

  it('every injury finding is high risk on its own', () => {
    // 2021 guideline, Newgard 2022: injury patterns [source]
    expect(risk(patient({ findings: ['pelvic-fracture'] }))).toBe('high');
    expect(risk(patient({ findings: ['bleeding-tourniquet-packing'] }))).toBe('high');
    expect(risk(patient({ findings: ['skull-deformity'] }))).toBe('high');
  });
});

describe('2021 field triage: falls and special considerations', () => {
  it('fall of 3.047 / 3.048 / 3.049 m against 10 ft', () => {
    // 2021 guideline, Newgard 2022: fall > 10 ft (3.048 m) [source]; NEMSIS 2904031 [source]
    expect(ids(patient({ fall: { heightM: 3.047 } }))).toEqual([]);
    expect(ids(patient({ fall: { heightM: 3.048 } }))).toEqual([]);
    const above = evaluate(patient({ fall: { heightM: 3.049 } })).criteria[0];
    expect(above.id).toBe('field-2021:fall-above-10-ft');
    expect(above.nemsis).toEqual({ element: 'eInjury.04', code: '2904031' });
    // Just over the threshold the feet get the places that tell them apart from it [ours]:
    // 3.049 m / 0.3048 = 10.0033 ft and 6.1 m / 0.3048 = 20.013 ft, worked by hand.
    expect(above.because).toBe('fall 3.049 m (10.003 ft) > 3.048 m (10 ft)');
    const twenty = evaluate(patient({ fall: { heightM: 6.1 } })).criteria.find((c) => c.id === 'policy:fall-above-20-ft');
    expect(twenty?.because).toBe('fall 6.1 m (20.01 ft) > 6.096 m (20 ft)');
    // Away from it, one place as before: 4 m = 13.12 ft.
    expect(evaluate(patient({ fall: { heightM: 4 } })).criteria[0].because).toBe('fall 4 m (13.1 ft) > 3.048 m (10 ft)');
  });

  it('a fall typed as 10 ft is exactly 3.048 m and does not fire; 11 ft does', () => {
    // 2021 guideline, Newgard 2022: fall > 10 ft [source]
    expect(ids(patient({ fall: { heightM: feetToMetres(10) } }))).toEqual([]);
    expect(ids(patient({ fall: { heightM: feetToMetres(11) } }))).toEqual(['field-2021:fall-above-10-ft']);
  });

  it('72-year-old, ground-level fall, head strike, on anticoagulant → moderate', () => {
    // 2021 guideline, Newgard 2022: low-level fall ≥ 65 with head impact (NEMSIS 2904033); anticoagulant use [source]
    const result = evaluate(patient({ ageYears: 72, anticoagulant: true, fall: { heightM: 0, headImpact: true } }));
    expect(result.fieldRisk).toBe('moderate');
    expect(result.activation).toBe('consult');
    expect(result.criteria.map((c) => c.id)).toEqual(['field-2021:low-level-fall-head-impact', 'field-2021:anticoagulant']);
    expect(result.criteria[0].nemsis?.code).toBe('2904033');
  });

  it('low-level fall with head strike at ages 5 / 6 and 64 / 65', () => {
    // 2021 guideline, Newgard 2022: young children ≤ 5, older adults ≥ 65 [source]
    const fall = { heightM: 0, headImpact: true };
    expect(risk(patient({ ageYears: 5, fall }))).toBe('moderate');
    expect(risk(patient({ ageYears: 6, fall }))).toBe('none');
    expect(risk(patient({ ageYears: 64, fall }))).toBe('none');
    expect(risk(patient({ ageYears: 65, fall }))).toBe('moderate');
  });

  it('a low-level fall tops out at 3.048 m; above it, the height criterion takes over', () => {
    // [ours]: low-level = heightM ≤ 3.048; 2021 guideline, Newgard 2022: fall > 10 ft [source]
    expect(ids(patient({ ageYears: 80, fall: { heightM: 3.048, headImpact: true } }))).toEqual(['field-2021:low-level-fall-head-impact']);
    expect(ids(patient({ ageYears: 80, fall: { heightM: 3.049, headImpact: true } }))).toEqual(['field-2021:fall-above-10-ft']);
  });

  it('head impact not recorded for an 80-year-old after a trip: said to be missing', () => {
    // 2021 guideline, Newgard 2022: low-level fall with head impact ≥ 65 [source]
    const result = evaluate(patient({ ageYears: 80, fall: { heightM: 0, headImpact: null } }));
    expect(result.fieldRisk).toBe('none');
    expect(result.missing.map((m) => m.field)).toEqual(['fall.headImpact']);
  });

  it('pregnancy 20 weeks does not count, 21 does', () => {
    // 2021 guideline, Newgard 2022: pregnancy > 20 weeks [source]
    expect(risk(patient({ sex: 'female', ageYears: 28, pregnancyWeeks: 20 }))).toBe('none');
    expect(risk(patient({ sex: 'female', ageYears: 28, pregnancyWeeks: 21 }))).toBe('moderate');
  });

  it('anticoagulant, abuse, high-resource needs, burns and crew concern are moderate', () => {
    // 2021 guideline, Newgard 2022: EMS judgment block [source]
    expect(risk(patient({ anticoagulant: true }))).toBe('moderate');
    for (const c of ['suspected-abuse', 'high-resource-needs', 'burns', 'ems-concern'] as const) {
      expect(risk(patient({ considerations: [c] }))).toBe('moderate');
    }
  });

  it('receiving blood is not a 2021 field criterion but calls full activation', () => {
    // ACS minimum criteria (Tignanelli 2018): transfer patients receiving blood [source]
    const result = evaluate(patient({ considerations: ['receiving-blood'] }));
    expect(result.fieldRisk).toBe('none');
    expect(result.activation).toBe('full');
    expect(result.criteria.map((c) => c.id)).toEqual(['policy:receiving-blood']);
  });
});

describe('unknown is never normal', () => {
  it('only age and height recorded: no risk called, every deciding vital listed as missing', () => {
    // 2021 guideline, Newgard 2022: the physiologic criteria need SBP, HR, RR, SpO2, GCS [source]
    const result = evaluate({ ageYears: 40, fall: { heightM: 1 } });
    expect(result.fieldRisk).toBe('none');
    expect(result.missing.map((m) => m.field)).toEqual([
      'vitals.sbp', 'vitals.hr', 'vitals.rr', 'vitals.spo2', 'vitals.spo2RoomAir', 'vitals.gcs',
      'vitals.intubated', 'vitals.respiratorySupport', 'vitals.respiratoryDistress', 'anticoagulant', 'pregnancyWeeks',
    ]);
    expect(result.missing[0].message).toBe('no systolic pressure recorded');
  });

  it('already at full activation and high risk: nothing left to miss', () => {
    // [ours]: missing lists only inputs that could raise the result
    const result = evaluate({ ageYears: 40, fall: { heightM: 1 }, vitals: { sbp: 70 } });
    expect(result.activation).toBe('full');
    expect(result.fieldRisk).toBe('high');
    expect(result.missing).toEqual([]);
  });

  it('a 45-year-old man is not asked about pregnancy; a 30-year-old woman is', () => {
    // [ours]: pregnancy asked only when the patient is not recorded male and is 10–59
    const base = patient({ pregnancyWeeks: null });
    expect(evaluate({ ...base, sex: 'male', ageYears: 45 }).missing).toEqual([]);
    expect(evaluate({ ...base, sex: 'female', ageYears: 30 }).missing.map((m) => m.field)).toEqual(['pregnancyWeeks']);
  });
});
