import type { Consideration, Finding } from '../schemas/clinical-options';

// Criteria are data: a condition tree over the clinical input, read by compile-criteria.ts, the
// one evaluator. Conditions are three-valued (met, not met, unknown) so that an unknown value never
// passes as normal. Every threshold and reading is listed, with its source, in SOURCES.md.

export type CriteriaSetId = 'field-2021' | 'field-2011';
/**
 * Where a criterion belongs: a guideline set, `policy`, the conditions policies may add, or
 * `local`, a criterion a hospital wrote into one version of its own policy.
 */
export type CriterionSetId = CriteriaSetId | 'policy' | 'local';
export type RiskTier = 'high' | 'moderate';
export type CriterionCategory = 'physiologic' | 'anatomic' | 'mechanism' | 'special';

/** Quantities compared as numbers; GCS ones may be known only as a range (parts, or a bare total). */
export type Quantity = 'sbp' | 'hr' | 'rr' | 'heightM' | 'gcsTotal' | 'gcsMotor';
export type Flag = 'anticoagulant' | 'intubated' | 'respiratorySupport' | 'respiratoryDistress' | 'headImpact';

export type Condition =
  /** quantity < value (+ perYearOfAge × completed years of age) */
  | { kind: 'below'; quantity: Quantity; value: number; perYearOfAge?: number; display?: string }
  /** quantity > value */
  | { kind: 'above'; quantity: Quantity; value: number; display?: string }
  /** quantity ≤ value */
  | { kind: 'at-most'; quantity: Quantity; value: number; display?: string }
  /** one quantity greater than another (HR > SBP) */
  | { kind: 'exceeds'; quantity: Quantity; other: Quantity }
  /** completed years of age in [from, below) */
  | { kind: 'age'; from?: number; below?: number; label: string }
  | { kind: 'flag'; flag: Flag }
  | { kind: 'finding'; finding: Finding }
  | { kind: 'consideration'; consideration: Consideration }
  /**
   * pulse oximetry on room air below value: a reading below it on oxygen meets it too (room air
   * would read lower still); a reading at or above it on oxygen leaves it unknown (SOURCES.md §2.4)
   */
  | { kind: 'room-air-spo2-below'; value: number }
  /**
   * fall height above `times` × the patient's body height: the height recorded, else estimated
   * from age and sex from a growth reference (SOURCES.md §3.4, §4)
   */
  | { kind: 'fall-above-body-heights'; times: number }
  /** pregnancy beyond the given weeks; not asked of a male patient or outside ages 10–59 */
  | { kind: 'pregnancy-above'; weeks: number }
  | { kind: 'any'; of: readonly Condition[] }
  | { kind: 'all'; of: readonly Condition[] };

export interface NemsisCode {
  element: 'eInjury.03' | 'eInjury.04';
  code: string;
}

export interface Criterion {
  /** Stable and unique across sets and the policy catalog: `<set>:<name>`. */
  id: string;
  set: CriterionSetId;
  category: CriterionCategory;
  /** The guideline's risk block; null for policy-catalog conditions, which carry no field risk. */
  tier: RiskTier | null;
  label: string;
  /** The published source, with its mark: [source], [from memory] or [ours]. */
  source: string;
  /** The source in plain words for screens: "2021 field-triage guideline (Newgard 2022)". */
  sourceLabel?: string;
  /** The NEMSIS v3.5 eInjury code, where SOURCES.md lists one; never guessed. */
  nemsis: NemsisCode | null;
  when: Condition;
  note?: string;
}

export interface CriteriaSet {
  id: CriteriaSetId;
  name: string;
  source: string;
  criteria: readonly Criterion[];
}
