// Reads over REST; the crew's writes go over the socket so that each one is acknowledged.
import { apiGet } from './http';
import { sendCommand } from './socket';
import type { SubmitAnswer } from '@shared/realtime/events';
import type { CaseCancel, CaseEventView, CaseRedirect, CrewCaseEventView, CaseRevisionView, CaseSummary, PreAlert, PreAlertUpdate } from '@shared/schemas/cases';

export type { CaseEventView, CaseRevisionView, CaseSummary, CrewCaseEventView };

export interface CaseDetail {
  case: CaseSummary;
  revisions: CaseRevisionView[];
  /** A crew member reads the steps without what the hospital wrote (CrewCaseEventView). */
  events: CaseEventView[] | CrewCaseEventView[];
}

export type { SubmitAnswer };

export const listCases = (state: 'open' | 'all' = 'open') => apiGet<{ cases: CaseSummary[]; at: number }>(`/api/cases?state=${state}`);
export const getCase = (id: number) => apiGet<CaseDetail>(`/api/cases/${id}`);

/** Ten seconds: a weak signal is slow, and a timeout only means the outbox tries again. */
const SEND_TIMEOUT_MS = 10_000;

export const submitPreAlert = (payload: PreAlert) => sendCommand('case:submit', payload, SEND_TIMEOUT_MS);
export const updateCase = (payload: PreAlertUpdate) => sendCommand('case:update', payload, SEND_TIMEOUT_MS);
export const cancelCase = (payload: CaseCancel) => sendCommand('case:cancel', payload, SEND_TIMEOUT_MS);
export const redirectCase = (payload: CaseRedirect) => sendCommand('case:redirect', payload, SEND_TIMEOUT_MS);
