import { describe, expect, it } from 'vitest';
import { ClinicalInput, describeIssues } from '../../../../shared/schemas/clinical';
import { feetToMetres, gcsTotalOf, metresToFeet, storeysToMetres } from '../../../../shared/schemas/units';

describe('clinical input schema', () => {
  it('accepts the least a crew can send: age and fall height', () => {
    expect(ClinicalInput.parse({ ageYears: 0.25, fall: { heightM: 0 } })).toEqual({ ageYears: 0.25, fall: { heightM: 0 } });
  });

  it('names each field that is wrong', () => {
    const result = ClinicalInput.safeParse({
      ageYears: 130,
      fall: { heightM: -1, surface: 'lava' },
      vitals: { sbp: 301, gcs: { eye: 5, verbal: 5, motor: 6 } },
      findings: ['broken-heart'],
    });
    expect(result.success).toBe(false);
    expect(describeIssues(result.error!)).toEqual([
      { field: 'ageYears', message: 'must be at most 120' },
      { field: 'fall.heightM', message: 'must be at least 0' },
      { field: 'fall.surface', message: expect.stringMatching(/^must be one of: concrete, asphalt/) },
      { field: 'vitals.sbp', message: 'must be at most 300' },
      { field: 'vitals.gcs.eye', message: 'must be at most 4' },
      { field: 'findings[0]', message: expect.stringMatching(/^must be one of: penetrating/) },
    ]);
  });

  it('says a required field is missing, and refuses a total that disagrees with its parts', () => {
    expect(describeIssues(ClinicalInput.safeParse({ fall: {} }).error!)).toEqual([
      { field: 'ageYears', message: 'is required' },
      { field: 'fall.heightM', message: 'is required' },
    ]);
    const mismatch = ClinicalInput.safeParse({ ageYears: 30, fall: { heightM: 1 }, vitals: { gcs: { eye: 4, verbal: 5, motor: 6 }, gcsTotal: 14 } });
    expect(describeIssues(mismatch.error!)).toEqual([{ field: 'vitals.gcsTotal', message: 'does not match eye + verbal + motor (15)' }]);
  });
});

describe('units a crew types', () => {
  it('feet and storeys to metres', () => {
    // 1 ft = 0.3048 m exactly [source: standard mechanics]; 1 storey = 10 ft [source: 2011 guideline, Sasser 2012]
    expect(feetToMetres(10)).toBe(3.048);
    expect(feetToMetres(20)).toBe(6.096);
    expect(storeysToMetres(1)).toBe(3.048);
    expect(storeysToMetres(3)).toBe(9.144);
    // Some studies use 12 ft per storey [trade]
    expect(storeysToMetres(1, 12)).toBe(3.6576);
    expect(metresToFeet(3.048)).toBe(10);
  });

  it('GCS parts to a total only when all three are known', () => {
    // GCS = eye + verbal + motor, 3–15 [trade]
    expect(gcsTotalOf({ eye: 3, verbal: 4, motor: 5 })).toBe(12);
    expect(gcsTotalOf({ eye: 3, verbal: null, motor: 5 })).toBeNull();
    expect(gcsTotalOf(null)).toBeNull();
  });
});
