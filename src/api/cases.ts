// Reads over REST; the crew's writes go over the socket so that each one is acknowledged.
import { apiGet } from './http';
import { sendCommand } from './socket';
import type { CaseCancel, CaseEventView, CaseRedirect, CaseRevisionView, CaseSummary, PreAlert, PreAlertUpdate } from '@shared/schemas/cases';

export type { CaseEventView, CaseRevisionView, CaseSummary };

export interface CaseDetail {
  case: CaseSummary;
  revisions: CaseRevisionView[];
  events: CaseEventView[];
}

export interface SubmitAnswer {
  caseId: number;
  caseNumber: string;
  created: boolean;
  summary: CaseSummary;
}

export const listCases = (state: 'open' | 'all' = 'open') => apiGet<{ cases: CaseSummary[]; at: number }>(`/api/cases?state=${state}`);
export const getCase = (id: number) => apiGet<CaseDetail>(`/api/cases/${id}`);

/** Ten seconds: a weak signal is slow, and a timeout only means the outbox tries again. */
const SEND_TIMEOUT_MS = 10_000;

export const submitPreAlert = (payload: PreAlert) => sendCommand<'case:submit', SubmitAnswer>('case:submit', payload, SEND_TIMEOUT_MS);
export const updateCase = (payload: PreAlertUpdate) => sendCommand<'case:update', { summary: CaseSummary; rose: boolean }>('case:update', payload, SEND_TIMEOUT_MS);
export const cancelCase = (payload: CaseCancel) => sendCommand<'case:cancel', { summary: CaseSummary }>('case:cancel', payload, SEND_TIMEOUT_MS);
export const redirectCase = (payload: CaseRedirect) => sendCommand<'case:redirect', { summary: CaseSummary }>('case:redirect', payload, SEND_TIMEOUT_MS);
