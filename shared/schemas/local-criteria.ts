import { z } from 'zod';
import { CONSIDERATIONS, FINDINGS } from './clinical-options';
import type { Condition, Quantity } from '../triage/criteria';

// The parts of a hospital's own criterion as the form sends them and a policy version stores them;
// shared/triage/local-criteria.ts turns them into the engine's `when` data and reads them back.
export const LOCAL_MEASURES = ['fallHeight', 'age', 'sbp', 'hr', 'rr', 'spo2RoomAir', 'gcsTotal', 'gcsMotor'] as const;
export type LocalMeasure = (typeof LOCAL_MEASURES)[number];
export const COMPARISONS = ['below', 'at-most', 'at-least', 'above'] as const;
export type Comparison = (typeof COMPARISONS)[number];
export const HEIGHT_UNITS = ['m', 'ft', 'storeys'] as const;
export type HeightUnit = (typeof HEIGHT_UNITS)[number];
export const LOCAL_FLAGS = ['anticoagulant', 'headImpact', 'intubated', 'respiratorySupport', 'respiratoryDistress'] as const;

interface MeasureInfo {
  name: string;
  unit: string;
  /** The plausible range a threshold must lie in, in the measure's own unit. */
  min: number;
  max: number;
  quantity: Quantity | null;
  comparisons: readonly Comparison[];
}

// Ranges follow the pre-alert's own input limits (shared/schemas/clinical.ts) [ours].
export const MEASURES: Readonly<Record<LocalMeasure, MeasureInfo>> = {
  fallHeight: { name: 'fall', unit: 'm', min: 0, max: 1000, quantity: 'heightM', comparisons: COMPARISONS },
  age: { name: 'age', unit: 'years', min: 0, max: 120, quantity: null, comparisons: COMPARISONS },
  sbp: { name: 'SBP', unit: 'mmHg', min: 0, max: 300, quantity: 'sbp', comparisons: COMPARISONS },
  hr: { name: 'heart rate', unit: '/min', min: 0, max: 300, quantity: 'hr', comparisons: COMPARISONS },
  rr: { name: 'respiratory rate', unit: '/min', min: 0, max: 100, quantity: 'rr', comparisons: COMPARISONS },
  // The engine reads room-air pulse oximetry only as "below a value" (a reading on oxygen is not a room-air one).
  spo2RoomAir: { name: 'SpO2 on room air', unit: '%', min: 0, max: 100, quantity: null, comparisons: ['below'] },
  gcsTotal: { name: 'GCS', unit: '', min: 3, max: 15, quantity: 'gcsTotal', comparisons: COMPARISONS },
  gcsMotor: { name: 'motor GCS', unit: '', min: 1, max: 6, quantity: 'gcsMotor', comparisons: COMPARISONS },
};

const num = z.number({ error: 'must be a number' }).finite({ error: 'must be a number' });
const whole = num.int({ error: 'must be a whole number of years' });

export const MeasurePart = z.object({
  kind: z.literal('measure'),
  measure: z.enum(LOCAL_MEASURES, { error: `must be one of: ${LOCAL_MEASURES.join(', ')}` }),
  comparison: z.enum(COMPARISONS, { error: `must be one of: ${COMPARISONS.join(', ')}` }),
  /** In the measure's unit; a fall height in the condition's heightUnit. */
  value: num,
});
export const AgeBandPart = z.object({ kind: z.literal('age-band'), from: whole, to: whole });
export const FlagPart = z.object({ kind: z.literal('flag'), flag: z.enum(LOCAL_FLAGS, { error: `must be one of: ${LOCAL_FLAGS.join(', ')}` }) });
export const FindingPart = z.object({ kind: z.literal('finding'), finding: z.enum(FINDINGS, { error: 'must be a finding of the catalogue' }) });
export const ConsiderationPart = z.object({ kind: z.literal('consideration'), consideration: z.enum(CONSIDERATIONS, { error: 'must be a consideration of the catalogue' }) });
const Leaf = z.discriminatedUnion('kind', [MeasurePart, AgeBandPart, FlagPart, FindingPart, ConsiderationPart], { error: 'must be a measure, an age band, a flag, a finding or a consideration' });
const Join = z.enum(['all', 'any'], { error: 'must be all or any' });
/** A group inside the condition: the second and last level. */
export const GroupPart = z.object({ kind: z.literal('group'), join: Join, parts: z.array(Leaf, { error: 'must be a list' }) });
export const LocalPart = z.discriminatedUnion('kind', [MeasurePart, AgeBandPart, FlagPart, FindingPart, ConsiderationPart, GroupPart], { error: 'must be a measure, an age band, a flag, a finding, a consideration or a group' });
export type LocalLeaf = z.infer<typeof Leaf>;
export type LocalPart = z.infer<typeof LocalPart>;

export const LocalCondition = z.object({
  join: Join,
  parts: z.array(LocalPart, { error: 'must be a list' }),
  /** The hospital's unit for fall heights, in which the form shows and takes them. */
  heightUnit: z.enum(HEIGHT_UNITS, { error: 'must be m, ft or storeys' }),
});
export type LocalCondition = z.infer<typeof LocalCondition>;

const text = (max: number) => z.string({ error: 'must be text' }).trim().min(1, { error: 'must not be empty' }).max(max, { error: `must be at most ${max} characters` });

/** What the form sends: the id is the one the draft knows it by (a stored id, or any new name). */
export const LocalCriterionDraft = z.object({
  id: text(200),
  label: text(120),
  reason: text(1000),
  condition: LocalCondition,
});
export type LocalCriterionDraft = z.infer<typeof LocalCriterionDraft>;

/** As stored in a policy version: the condition's `when` tree and the source the explanations cite. */
export const LocalCriterion = LocalCriterionDraft.extend({
  source: text(1200),
  when: z.custom<Condition>((v) => typeof v === 'object' && v !== null, { error: 'must be a condition tree' }),
});
export type LocalCriterion = z.infer<typeof LocalCriterion>;
