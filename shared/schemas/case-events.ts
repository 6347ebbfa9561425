// What each step on a case records in `case_events.data` (and its audit row's `after`), by the
// step's kind. The server writes these through recordCaseEvent and the timeline reads them, so
// both sides name the same fields; a new kind is added here first.
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
