import type { Sex } from '../schemas/clinical-options';

// A child's height estimated from age, for the 2011 fall rule's "two to three times the height of
// the child" when the crew gives no height (SOURCES.md §4). Medians of height for age: the WHO
// Child Growth Standards (2006) under 5 years, the CDC 2000 growth charts from 5 to 15 years.
// The figures are rounded to the centimetre and are from memory, not read from the tables
// [from memory]; SOURCES.md §4 says so too.

export interface GrowthReference {
  /** The reference in plain words, shown beside an estimate. */
  name: string;
  /** Whole years of age the row starts at. */
  ages: readonly number[];
  female: readonly number[];
  male: readonly number[];
}

/** WHO Child Growth Standards, length/height-for-age medians, cm, at 0–5 years [from memory]. */
export const WHO_UNDER_5: GrowthReference = {
  name: 'WHO growth standards (median height for age)',
  ages: [0, 1, 2, 3, 4, 5],
  female: [49, 74, 86, 95, 103, 109],
  male: [50, 76, 87, 96, 103, 110],
};

/** CDC 2000 growth charts, stature-for-age 50th percentiles, cm, at 5–15 years [from memory]. */
export const CDC_2_TO_20: GrowthReference = {
  name: 'CDC growth charts (median stature for age)',
  ages: [5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15],
  female: [108, 115, 121, 128, 133, 138, 145, 151, 157, 160, 162],
  male: [109, 116, 122, 128, 133, 138, 143, 149, 156, 163, 169],
};

export interface HeightEstimate {
  metres: number;
  reference: string;
}

/**
 * The median height at an age (linear between whole years), for the patient's sex; for any other
 * or an unknown sex, the lower of the two, so that "twice the height" errs towards firing [ours].
 * Null from age 15 up, where the children's rule no longer applies.
 */
export function estimateHeight(ageYears: number, sex: Sex | null): HeightEstimate | null {
  if (!(ageYears >= 0) || ageYears >= 15) return null;
  const ref = ageYears < 5 ? WHO_UNDER_5 : CDC_2_TO_20;
  const at = (row: readonly number[]) => {
    const k = Math.min(Math.floor(ageYears) - ref.ages[0], ref.ages.length - 2);
    const share = ageYears - ref.ages[k];
    return row[k] + (row[k + 1] - row[k]) * share;
  };
  const cm = sex === 'female' ? at(ref.female) : sex === 'male' ? at(ref.male) : Math.min(at(ref.female), at(ref.male));
  return { metres: Math.round(cm) / 100, reference: ref.name };
}
