import { z } from 'zod';
import { safeText } from './text';
import { boundedTime } from './dates';
import { PolicyLevel, PolicyRule } from '../triage/policy';

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
});
export type SaveDraft = z.infer<typeof SaveDraft>;

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
