import { z } from 'zod';
import { safeText } from './text';
import { boundedTime } from './dates';
import { PolicyLevel, PolicyRule } from '../triage/policy';
import { LocalCondition, LocalCriterionDraft } from '../triage/local-criteria';
import type { LooseningWarning } from '../triage/loosening';
import type { HeightFact } from '../triage/compile-criteria';

// Requests of the Policies screen. The policy document itself is the engine's Policy; a draft
// carries only what a hospital edits, and the server fills in id, version and approval.

export const PolicyStatus = z.enum(['draft', 'approved', 'published', 'retired']);
export type PolicyStatus = z.infer<typeof PolicyStatus>;

const id = z.number({ error: 'must be a number' }).int({ error: 'must be a whole number' }).positive({ error: 'must be positive' });

export const CreateDraft = z.object({
  hospitalId: id,
  /** What the draft starts as: the version in force, the shipped example, or a chosen version's id. */
  from: z.union([z.literal('in-force'), z.literal('example'), id], { error: 'must be in-force, example or a version id' }).default('in-force'),
});
export type CreateDraft = z.infer<typeof CreateDraft>;

export const SaveDraft = z.object({
  name: safeText({ max: 200 }),
  note: safeText({ max: 2000, min: 0, lines: true }).optional(),
  levels: z.array(PolicyLevel, { error: 'must be a list' }),
  rules: z.array(PolicyRule, { error: 'must be a list' }),
  /** The hospital's own criteria; rules name a new one by the id the form gave it. */
  localCriteria: z.array(LocalCriterionDraft, { error: 'must be a list' }).max(50, { error: 'must hold at most 50 criteria' }).optional(),
});
export type SaveDraft = z.infer<typeof SaveDraft>;

export const ApproveVersion = z.object({
  /** The approver's tick: they read every loosening warning the draft shows. */
  looseningAcknowledged: z.boolean({ error: 'must be true or false' }).default(false),
});
export type ApproveVersion = z.infer<typeof ApproveVersion>;

/** A condition tried on the hospital's past cases while it is being written. */
export const LocalPreviewQuery = z.object({ hospitalId: id, condition: LocalCondition });
export type LocalPreviewQuery = z.infer<typeof LocalPreviewQuery>;

export interface LocalPreviewExample {
  caseId: number;
  caseNumber: string;
  createdAt: number;
  /** What the case showed of the rule: the engine's own explanation of the condition. */
  because: string;
  /** The fall heights `because` states, for showing them in the hospital's unit. */
  heights?: HeightFact[];
}

export interface LocalPreview {
  sentence: string;
  /** How many of the hospital's past cases (latest revision, not cancelled) it would catch, of how many. */
  caught: number;
  cases: number;
  examples: LocalPreviewExample[];
}

export type { LooseningWarning };

export const PublishVersion = z.object({
  /** Milliseconds since the epoch, within 2000–2100; now when left out. */
  effectiveFrom: boundedTime.optional(),
});
export type PublishVersion = z.infer<typeof PublishVersion>;

/** One row of a hospital's version list, as the server answers it. */
export const PolicyVersionSummary = z.object({
  id,
  hospitalId: id,
  policyId: z.string(),
  version: z.number().int(),
  status: PolicyStatus,
  name: z.string(),
  createdBy: z.string().nullable(),
  createdAt: z.number(),
  approvedByName: z.string().nullable(),
  approvedAt: z.number().nullable(),
  publishedBy: z.string().nullable(),
  publishedAt: z.number().nullable(),
  effectiveFrom: z.number().nullable(),
  /** True for the one published version that decides new evaluations now. */
  inForce: z.boolean(),
});
export type PolicyVersionSummary = z.infer<typeof PolicyVersionSummary>;
