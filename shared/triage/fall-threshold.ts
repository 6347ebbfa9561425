import { CRITERIA_SETS } from './catalog';
import type { Condition, CriteriaSetId } from './criteria';

function heightThresholds(condition: Condition, years: number): number[] {
  switch (condition.kind) {
    case 'above':
      return condition.quantity === 'heightM' ? [condition.value] : [];
    case 'any':
      return condition.of.flatMap((c) => heightThresholds(c, years));
    case 'all': {
      // A rule for another age group does not apply to this patient.
      const outOfAge = condition.of.some((c) => c.kind === 'age' && !(years >= (c.from ?? -Infinity) && years < (c.below ?? Infinity)));
      return outOfAge ? [] : condition.of.flatMap((c) => heightThresholds(c, years));
    }
    default:
      return [];
  }
}

/**
 * The fall height (metres) above which the set's fall criterion is met for a patient of this
 * age, read from the set itself; null when the set has none for the age. A child's rule of
 * twice their own height is not a fixed figure and is left out.
 */
export function fallHeightThresholdM(set: CriteriaSetId, ageYears: number): number | null {
  const years = Math.floor(ageYears);
  const found = CRITERIA_SETS[set].criteria.flatMap((c) => heightThresholds(c.when, years));
  return found.length ? Math.min(...found) : null;
}
