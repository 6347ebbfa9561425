import type { Handover } from './clinical';
import { z } from 'zod';
import { ReaderTimeZone } from '../days';
import { safeText } from './text';
import { boundedDate, spanIssue, withinMaxSpan } from './dates';
import { LEVEL_IDS, type LevelId } from '../triage/policy';
import type { CaseState, CaseSummary, CaseEventView } from './cases';
import type { Evaluation } from '../triage/evaluate';

// Requests and answers of the Activation review screen: the filtered case table, a case's
// timeline, the lead's review work and the response-time compliance figure.

export const REVIEW_STATUSES = ['signed-off', 'flagged', 'discussed'] as const;
export type ReviewStatus = (typeof REVIEW_STATUSES)[number];
/** Where a case stands in review: its latest review, or not reviewed yet. */
export const CASE_REVIEW_STATES = ['unreviewed', ...REVIEW_STATUSES] as const;
export type CaseReviewState = (typeof CASE_REVIEW_STATES)[number];

export const REVIEW_SORT_KEYS = ['createdAt', 'caseNumber', 'hospital', 'recommended', 'decided', 'state', 'ackMinutes', 'teamMinutes', 'review'] as const;
export type ReviewSortKey = (typeof REVIEW_SORT_KEYS)[number];

const isoDate = boundedDate;
const flag = z.stringbool({ error: 'must be true or false' }).optional().default(false);
const whole = (min: number, max: number) =>
  z.coerce.number({ error: 'must be a number' }).int({ error: 'must be a whole number' }).min(min, { error: `must be at least ${min}` }).max(max, { error: `must be at most ${max}` });

const timeZone = ReaderTimeZone;

const range = { from: isoDate.optional(), to: isoDate.optional(), timeZone };
const rangeInOrder = (q: { from?: string; to?: string }) => !q.from || !q.to || q.from <= q.to;
const rangeIssue = { error: 'must be on or after the start date', path: ['to'] };

/** The table's filters, all optional; several together narrow the list (AND). */
const filterShape = {
    ...range,
    hospitalId: z.coerce.number({ error: 'must be a hospital number' }).int({ error: 'must be a whole number' }).positive({ error: 'must be positive' }).optional(),
    decided: z.enum([...LEVEL_IDS, 'undecided'], { error: `must be one of: ${[...LEVEL_IDS, 'undecided'].join(', ')}` }).optional(),
    /** The decided level is not the recommended one (either way). */
    differs: flag,
    /** The decided level is below the recommendation: the under-triage risk a lead reads first. */
    below: flag,
    /** Acknowledged later than the hospital's escalation minutes, or escalated as overdue. */
    overdue: flag,
    /** Team at the bedside later than the response target after arrival. */
    slowTeam: flag,
    review: z.enum(CASE_REVIEW_STATES, { error: `must be one of: ${CASE_REVIEW_STATES.join(', ')}` }).optional(),
};
export const ReviewFilters = z.object(filterShape).refine(rangeInOrder, rangeIssue).refine(withinMaxSpan, spanIssue);
export type ReviewFilters = z.infer<typeof ReviewFilters>;

export const ReviewListQuery = z
  .object({
    ...filterShape,
    sort: z.enum(REVIEW_SORT_KEYS, { error: `must be one of: ${REVIEW_SORT_KEYS.join(', ')}` }).default('createdAt'),
    dir: z.enum(['asc', 'desc'], { error: 'must be asc or desc' }).default('desc'),
    page: whole(1, 100_000).default(1),
    pageSize: whole(5, 100).default(25),
  })
  .refine(rangeInOrder, rangeIssue)
  .refine(withinMaxSpan, spanIssue);
export type ReviewListQuery = z.infer<typeof ReviewListQuery>;
/** What the client asks for: every field may be left out and takes its default. */
export type ReviewListRequest = Partial<ReviewListQuery>;

export const ComplianceQuery = z
  .object({ ...range, hospitalId: z.coerce.number({ error: 'must be a hospital number' }).int({ error: 'must be a whole number' }).positive({ error: 'must be positive' }).optional() })
  .refine(rangeInOrder, rangeIssue)
  .refine(withinMaxSpan, spanIssue);
export type ComplianceQuery = z.infer<typeof ComplianceQuery>;

const comment = safeText({ max: 2000, min: 0, lines: true });
export const SignOff = z.object({ comment: comment.optional() });
export type SignOff = z.infer<typeof SignOff>;
export const FlagForPeerReview = z.object({ comment: comment.min(3, { error: 'needs a few words on what the peer review should look at' }) });
export type FlagForPeerReview = z.infer<typeof FlagForPeerReview>;
export const CloseDiscussion = z.object({ outcome: comment.min(3, { error: 'needs a few words on what the peer review concluded' }) });
export type CloseDiscussion = z.infer<typeof CloseDiscussion>;

export const ResponseSettings = z.object({
  hospitalId: z.number({ error: 'must be a hospital number' }).int({ error: 'must be a whole number' }).positive({ error: 'must be positive' }),
  targetMinutes: z.number({ error: 'must be a number of minutes' }).int({ error: 'must be whole minutes' }).min(1, { error: 'must be at least 1' }).max(120, { error: 'must be at most 120' }),
  compliance: z.number({ error: 'must be a share between 0 and 1' }).min(0.05, { error: 'must be at least 0.05 (5 %)' }).max(1, { error: 'must be at most 1 (100 %)' }),
});
export type ResponseSettings = z.infer<typeof ResponseSettings>;

export interface ReviewView {
  id: number;
  status: ReviewStatus;
  comment: string | null;
  outcome: string | null;
  reviewer: string;
  createdAt: number;
  closedBy: string | null;
  closedAt: number | null;
}

/** One line of the review table. Minutes are null when either end was not recorded. */
export interface ReviewRow {
  id: number;
  caseNumber: string;
  state: CaseState;
  hospital: { id: number; name: string };
  agency: string;
  unit: string | null;
  createdAt: number;
  recommendedLevel: LevelId;
  decidedLevel: LevelId | null;
  decidedReason: string | null;
  decidedBy: string | null;
  differs: boolean;
  below: boolean;
  ackMinutes: number | null;
  ackOverdue: boolean;
  teamMinutes: number | null;
  teamSlow: boolean;
  review: CaseReviewState;
  reviewedBy: string | null;
}

export interface ReviewListPage {
  rows: ReviewRow[];
  total: number;
  page: number;
  pageSize: number;
  sort: ReviewSortKey;
  dir: 'asc' | 'desc';
  /** Each hospital's own names for the levels, from its policy in force. */
  levelNames: Record<number, Record<LevelId, string>>;
}

export interface IntervalView {
  id: 'pre-alert-to-acknowledged' | 'arrival-to-team' | 'pre-alert-to-decided' | 'pre-alert-to-arrival';
  label: string;
  from: number | null;
  to: number | null;
  minutes: number | null;
  targetMinutes: number | null;
  /** Null when there is no target or an end is missing. */
  met: boolean | null;
  note: string | null;
}

export interface TimelineRevision {
  revision: number;
  createdAt: number;
  createdBy: string;
  etaMinutes: number | null;
  notes: string | null;
  fieldRisk: Evaluation['fieldRisk'];
  activation: LevelId;
  criteria: Evaluation['criteria'];
  missing: Evaluation['missing'];
  policy: Evaluation['policy'];
  vitals: Record<string, unknown> | null;
  /** The crew's handover at this revision (time of injury, anticoagulant, treatment, allergies). */
  handover: Handover | null;
}

export interface CaseTimeline {
  case: CaseSummary;
  levelNames: Record<LevelId, string>;
  events: CaseEventView[];
  revisions: TimelineRevision[];
  intervals: IntervalView[];
  reviews: ReviewView[];
  review: CaseReviewState;
  /** Whether this reader may sign off or flag (trauma lead or admin of the case's hospital). */
  canReview: boolean;
  /** Why review is not open yet, when it is not. */
  reviewBlocked: string | null;
}

export interface DiscussionItem {
  review: ReviewView;
  case: { id: number; caseNumber: string; createdAt: number; hospital: string; recommendedLevel: LevelId; decidedLevel: LevelId | null };
}

export interface ComplianceMonth {
  /** YYYY-MM in the reader's time zone, by arrival. */
  month: string;
  activations: number;
  met: number;
  late: number;
  notRecorded: number;
  share: number | null;
  interval: [number, number] | null;
  meetsTarget: boolean | null;
}

export interface ComplianceReport {
  hospital: { id: number; name: string };
  targetMinutes: number;
  targetShare: number;
  months: ComplianceMonth[];
  overall: Omit<ComplianceMonth, 'month'>;
}

export type AuditChainStatus = { ok: true; rows: number; checkedAt: number } | { ok: false; rows: number; brokenAt: number; reason: string; checkedAt: number };
