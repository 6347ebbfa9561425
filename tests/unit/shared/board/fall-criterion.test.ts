import { describe, expect, it } from 'vitest';
import { fallCriterionPhrase, formatFallWithCriterion } from '../../../../shared/schemas/board';
import { fallHeightThresholdM } from '../../../../shared/triage/fall-threshold';

// Fall criteria: 2021, a fall over 10 ft (3.048 m) at any age [source: Newgard CD et al., 2022];
// 2011, adults (15 or older) over 20 ft (6.096 m), children over 10 ft or two to three times
// their height [source: Sasser SM et al., 2012].
describe('the fall height beside the criterion it is compared with', () => {
  it('reads the figure from the criteria set for the patient’s age', () => {
    expect(fallHeightThresholdM('field-2021', 47)).toBe(3.048);
    expect(fallHeightThresholdM('field-2021', 4)).toBe(3.048);
    expect(fallHeightThresholdM('field-2011', 47)).toBe(6.096);
    expect(fallHeightThresholdM('field-2011', 15)).toBe(6.096);
    expect(fallHeightThresholdM('field-2011', 14.9)).toBe(3.048);
  });

  it('shows it exactly, in the hospital’s unit first, the other unit beside it (1 ft = 0.3048 m exactly, common practice)', () => {
    expect(fallCriterionPhrase('field-2011', 47, 'm')).toBe('criterion: above 6.096 m (20 ft)');
    expect(fallCriterionPhrase('field-2021', 47, 'ft')).toBe('criterion: above 10 ft (3.048 m)');
    // A storey is counted as 10 ft; the published figure is in feet, so feet lead.
    expect(fallCriterionPhrase('field-2021', 47, 'storeys')).toBe('criterion: above 10 ft (3.048 m)');
  });

  it('3.05 m typed in metres, shown in feet: the typed figure and the criterion side by side', () => {
    const fall = { heightM: 3.05, surface: 'concrete' as const, entered: { value: 3.05, unit: 'm' as const } };
    expect(formatFallWithCriterion({ ageYears: 47, fall }, 'field-2021', 'ft')).toBe('10.0 ft (entered as 3.05 m) onto concrete; criterion: above 10 ft (3.048 m)');
    // A fall from standing has no height to compare.
    expect(formatFallWithCriterion({ ageYears: 80, fall: { heightM: 0, surface: 'tile-stone' } }, 'field-2021', 'm')).not.toContain('criterion');
  });
});
