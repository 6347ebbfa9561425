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
import { eventTitle } from '@shared/schemas/case-events';

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

/** Plain words for each step on a case. */
export const eventWords = eventTitle;
