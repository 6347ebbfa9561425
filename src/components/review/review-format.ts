import type { CaseReviewState } from '@shared/schemas/review';

export const when = (ms: number | null | undefined) => (ms == null ? '—' : new Date(ms).toLocaleString('en-GB', { dateStyle: 'medium', timeStyle: 'short' }));
export const clock = (ms: number | null | undefined) => (ms == null ? '—' : new Date(ms).toLocaleTimeString('en-GB', { hour: '2-digit', minute: '2-digit' }));
export const minutes = (value: number | null | undefined) => (value == null ? 'not recorded' : `${value.toLocaleString('en-GB', { maximumFractionDigits: 1 })} min`);
export const percent = (share: number | null | undefined) => (share == null ? '—' : `${Math.round(share * 1000) / 10} %`);

export const REVIEW_WORDS: Record<CaseReviewState, string> = {
  unreviewed: 'Not reviewed',
  'signed-off': 'Signed off',
  flagged: 'To discuss',
  discussed: 'Discussed',
};

import { STATE_WORDS as CASE_STATE_WORDS } from '@shared/schemas/cases';

/** The shared state words, readable by any state text a listing carries. */
export const STATE_WORDS: Readonly<Record<string, string>> = CASE_STATE_WORDS;

export const ROLE_WORDS: Record<string, string> = {
  paramedic: 'paramedic',
  charge_nurse: 'charge nurse',
  trauma_lead: 'trauma lead',
  quality: 'quality team',
  admin: 'administrator',
  system: 'Plumbline',
  machine_client: 'record system',
};

/** Plain words for each step on a case; an unknown kind still reads (dashes become spaces). */
export const EVENT_WORDS: Record<string, string> = {
  received: 'Pre-alert received',
  revised: 'Update from the crew',
  cancelled: 'Cancelled by the crew',
  redirected: 'Redirected to another ED',
  acknowledged: 'Acknowledged',
  'level-decided': 'Level decided',
  'bay-assigned': 'Bay assigned',
  paged: 'Team paged',
  'page-failed': 'Page failed',
  'page-sms-sent': 'Team paged by SMS',
  'page-repeated': 'Page repeated: nobody on the way yet',
  'page-escalated': 'Page escalated to the next tier',
  'page-receipt': 'SMS delivery report',
  'page-reply': 'Reply to the page',
  'page-mail-failed': 'Page e-mail failed',
  arrived: 'Patient arrived',
  'team-at-bedside': 'Team leader at the bedside',
  closed: 'Closed',
  overdue: 'Escalated: not acknowledged in time',
  'review-signed-off': 'Review: signed off',
  'review-flagged': 'Review: flagged for peer review',
  'review-discussed': 'Review: peer review closed',
};
export const eventWords = (kind: string) => EVENT_WORDS[kind] ?? kind.replace(/-/g, ' ').replace(/^./, (c) => c.toUpperCase());
