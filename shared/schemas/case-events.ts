// What each step on a case records in `case_events.data` (and its audit row's `after`), by the
// step's kind, and each kind's words: the title a timeline shows, the phrase a sentence uses
// ("… by Morgan at 03:12"), and whether the crew follows it. The server writes the data through
// recordCaseEvent; the timeline, the server's messages and the review screens read both. A new
// kind is added here first.
import type { FieldRisk } from '../triage/evaluate';
import type { LevelId } from '../triage/policy';
import type { PagedLevel, ReplyAnswer } from './paging';

/** A tier's round of the page: who was sent an SMS and who an e-mail. */
interface PageRound { level: PagedLevel; tier: number; round: number; sms: string[]; email: string[] }
/** An escalation step: the list told, after how many minutes since the pre-alert (or its redirect). */
interface EscalationStep { step: number; minutes: number; list: PagedLevel | 'escalation' | 'senior'; since: number; recipients: string[] }
interface ReviewWritten { reviewId: number; status: 'signed-off' | 'flagged'; comment: string | null }

export interface CaseEventDataOf {
  received: { revision: number; fieldRisk: FieldRisk; activation: LevelId; criteria: string[]; hospitalId: number; etaMinutes: number | null };
  revised: { revision: number; from: LevelId; to: LevelId; rose: boolean; fieldRisk: FieldRisk; criteria: string[]; etaMinutes: number | null };
  cancelled: { state: 'cancelled'; reason: string };
  redirected: { hospitalId: number; reason: string; revision: number; activation: LevelId };
  /** first: the case's first acknowledgement; levelRose: again, after the recommendation rose. */
  acknowledged: { recommended: LevelId; revision: number; levelRose: boolean; first: boolean };
  'level-decided': { level: LevelId; recommended: LevelId; below: boolean; reason: string | null; revision: number };
  /** sharedWith: the cases already in the bay when the nurse confirmed it anyway. */
  'bay-assigned': { bay: string; sharedWith: number[] };
  paged: { level: LevelId; list: LevelId; recipients: string[]; subject: string; bay: string | null; etaAt: number | null };
  'page-failed': { level: LevelId; recipients: string[]; error: string };
  'page-sms-sent': PageRound;
  'page-repeated': PageRound;
  'page-escalated': PageRound;
  'page-mail-failed': { tier: number; round: number; recipients: string[]; error: string };
  /** A delivery report: `error` when the send itself failed, `errorCode` the provider's code. */
  'page-receipt': { messageId: number; to: string; state: string; error?: string; errorCode?: string | null };
  'page-reply': { from: string; name: string | null; answer: ReplyAnswer; text: string };
  /** at: the time recorded for the arrival, which may be earlier than when it was typed. */
  arrived: { at: number; etaAt: number | null };
  'team-at-bedside': { at: number; minutesFromArrival: number };
  closed: { reason: string | null; arrived: boolean };
  overdue: EscalationStep;
  escalated: EscalationStep;
  'escalation-mail-failed': { step: number; recipients: string[]; error: string };
  'review-signed-off': ReviewWritten;
  'review-flagged': ReviewWritten;
  'review-discussed': { reviewId: number; status: 'discussed'; outcome: string };
}

export type CaseEventKind = keyof CaseEventDataOf;

/** One member per kind: the kind beside what it records, so a switch on `kind` knows the fields. */
export type CaseEventData = { [K in CaseEventKind]: { kind: K; data: CaseEventDataOf[K] } }[CaseEventKind];

interface EventWords {
  title: string;
  phrase: string;
  /** Shown on the crew's timeline (without its data); pages, escalations and reviews are the hospital's. */
  crew?: true;
}

export const EVENT_WORDS = {
  received: { title: 'Pre-alert received', phrase: 'received', crew: true },
  revised: { title: 'Update from the crew', phrase: 'updated by the crew', crew: true },
  cancelled: { title: 'Cancelled by the crew', phrase: 'cancelled by the crew', crew: true },
  redirected: { title: 'Redirected to another ED', phrase: 'redirected by the crew', crew: true },
  acknowledged: { title: 'Acknowledged', phrase: 'acknowledged', crew: true },
  'level-decided': { title: 'Level decided', phrase: 'level decided', crew: true },
  'bay-assigned': { title: 'Bay assigned', phrase: 'bay assigned', crew: true },
  paged: { title: 'Team paged', phrase: 'team paged' },
  'page-failed': { title: 'Page failed', phrase: 'page failed' },
  'page-sms-sent': { title: 'Team paged by SMS', phrase: 'team paged by SMS' },
  'page-repeated': { title: 'Page repeated: nobody on the way yet', phrase: 'page repeated' },
  'page-escalated': { title: 'Page escalated to the next tier', phrase: 'page escalated to the next tier' },
  'page-receipt': { title: 'SMS delivery report', phrase: 'SMS delivery reported' },
  'page-reply': { title: 'Reply to the page', phrase: 'page answered' },
  'page-mail-failed': { title: 'Page e-mail failed', phrase: 'page e-mail failed' },
  'escalation-mail-failed': { title: 'Escalation e-mail failed', phrase: 'escalation e-mail failed' },
  arrived: { title: 'Patient arrived', phrase: 'marked arrived', crew: true },
  'team-at-bedside': { title: 'Team leader at the bedside', phrase: 'team leader at the bedside recorded', crew: true },
  closed: { title: 'Closed', phrase: 'closed', crew: true },
  overdue: { title: 'Escalated: not acknowledged in time', phrase: 'marked overdue' },
  escalated: { title: 'Escalated', phrase: 'escalated' },
  'review-signed-off': { title: 'Review: signed off', phrase: 'signed off in review' },
  'review-flagged': { title: 'Review: flagged for peer review', phrase: 'flagged for peer review' },
  'review-discussed': { title: 'Review: peer review closed', phrase: 'peer review closed' },
} as const satisfies Record<CaseEventKind, EventWords>;
export const CASE_EVENT_KINDS = Object.keys(EVENT_WORDS) as CaseEventKind[];
export const CREW_EVENT_KINDS: ReadonlySet<string> = new Set(CASE_EVENT_KINDS.filter((kind) => 'crew' in EVENT_WORDS[kind]));

const known = (kind: string): kind is CaseEventKind => Object.hasOwn(EVENT_WORDS, kind);

/** A step's title; an unknown kind still reads (dashes become spaces). */
export const eventTitle = (kind: string): string => (known(kind) ? EVENT_WORDS[kind].title : kind.replace(/-/g, ' ').replace(/^./, (c) => c.toUpperCase()));

/** A step in a sentence; an unknown kind reads as its id. */
export const eventPhrase = (kind: string): string => (known(kind) ? EVENT_WORDS[kind].phrase : kind);
