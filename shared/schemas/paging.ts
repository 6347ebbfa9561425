import { z } from 'zod';
import { isValidPhoneNumber, parsePhoneNumberWithError } from 'libphonenumber-js';
import { EmailAddress } from './people';

// Paging by SMS and e-mail: people's paging contacts, each level's tiers, and what came back.

export const PAGED_LEVELS = ['full', 'limited', 'consult'] as const;
export type PagedLevel = (typeof PAGED_LEVELS)[number];
export const MAX_TIERS = 3;

/** A mobile number in E.164 (+ country code and number, no spaces), checked against the numbering plans. */
export const MobileNumber = z
  .string({ error: 'must be text' })
  .trim()
  .refine((v) => /^\+[1-9]\d{6,14}$/.test(v), { error: (issue) => `"${String(issue.input)}" is not a number in E.164 form (+ country code and number, no spaces)` })
  .refine((v) => isValidPhoneNumber(v), { error: (issue) => `"${String(issue.input)}" is not a valid mobile number` })
  .transform((v) => parsePhoneNumberWithError(v).number as string);

export const PagingContact = z.object({
  email: EmailAddress.nullable(),
  mobile: MobileNumber.nullable(),
});
export type PagingContact = z.infer<typeof PagingContact>;

export const PagingEntry = z.discriminatedUnion('kind', [
  z.object({ kind: z.literal('person'), value: z.number({ error: 'must be a person id' }).int({ error: 'must be a person id' }).positive({ error: 'must be a person id' }) }),
  z.object({ kind: z.literal('email'), value: EmailAddress }),
  z.object({ kind: z.literal('sms'), value: MobileNumber }),
], { error: 'must be a person, an e-mail address or a mobile number' });
export type PagingEntry = z.infer<typeof PagingEntry>;

const minutes = z.number({ error: 'must be a number' }).int({ error: 'must be whole minutes' }).min(1, { error: 'must be at least 1' }).max(60, { error: 'must be at most 60' });

export const LevelTiers = z.object({
  /** Minutes without an "on my way" before the page repeats or escalates. */
  minutes,
  /** How many times a tier is paged again before the next tier is paged. */
  repeats: z.number({ error: 'must be a number' }).int({ error: 'must be a whole number' }).min(0, { error: 'must be at least 0' }).max(5, { error: 'must be at most 5' }),
  /** Tier 1 adds to the level's own list; tiers 2 and 3 are paged only on escalation. */
  tiers: z.array(z.array(PagingEntry, { error: 'must be a list' }).max(50, { error: 'must hold at most 50 entries' }), { error: 'must be a list of tiers' }).min(1, { error: 'must hold tier 1' }).max(MAX_TIERS, { error: `must hold at most ${MAX_TIERS} tiers` }),
});
export type LevelTiers = z.infer<typeof LevelTiers>;

export const PagingPlan = z.object({
  levels: z.object(Object.fromEntries(PAGED_LEVELS.map((l) => [l, LevelTiers])) as Record<PagedLevel, typeof LevelTiers>),
  /** The hospital's target from the page to the first "on my way" reply, for the activation review. */
  targetMinutes: minutes,
});
export type PagingPlan = z.infer<typeof PagingPlan>;

export type ReplyAnswer = 'coming' | 'declined' | 'text';

/** What the board shows under a paged case: who answered, and which messages did not arrive. */
export interface PagingStatus {
  caseId: number;
  replies: Array<{ id: number; name: string; answer: ReplyAnswer; text: string; at: number }>;
  failures: Array<{ id: number; recipient: string; name: string | null; at: number; fellBackTo: string | null }>;
  tier: number;
  round: number;
}

export interface SentMessage {
  id: number;
  channel: 'sms' | 'email';
  caseId: number | null;
  caseNumber: string | null;
  recipient: string;
  name: string | null;
  subject: string | null;
  body: string;
  state: string;
  error: string | null;
  tier: number | null;
  round: number | null;
  fallbackOf: number | null;
  createdAt: number;
  updatedAt: number;
}
