import { apiGet, apiSend } from './http';
import type {
  AuditChainStatus, CaseTimeline, ComplianceReport, DiscussionItem, ResponseSettings, ReviewListPage, ReviewListRequest, ReviewView,
} from '@shared/schemas/review';

export type { AuditChainStatus, CaseTimeline, ComplianceReport, DiscussionItem, ReviewListPage, ReviewListRequest, ReviewView };

/** Only the filters that are set go on the address, so a shared link reads plainly. */
function query(params: Record<string, unknown>): string {
  const search = new URLSearchParams();
  for (const [key, value] of Object.entries(params)) {
    if (value === undefined || value === null || value === '' || value === false) continue;
    search.set(key, String(value));
  }
  const text = search.toString();
  return text ? `?${text}` : '';
}

export const listReviewCases = (request: ReviewListRequest) => apiGet<ReviewListPage>(`/api/review/cases${query(request)}`);
/** The address of the CSV download of the same filters, for a plain link (the browser saves it). */
export const reviewCsvUrl = (request: ReviewListRequest) => `/api/review/cases.csv${query({ ...request, page: undefined, pageSize: undefined })}`;
export const getCaseTimeline = (caseId: number) => apiGet<CaseTimeline>(`/api/review/cases/${caseId}`);
export const signOffCase = (caseId: number, comment?: string) => apiSend<ReviewView>('POST', `/api/review/cases/${caseId}/sign-off`, { comment });
export const flagCase = (caseId: number, comment: string) => apiSend<ReviewView>('POST', `/api/review/cases/${caseId}/flag`, { comment });
export const closeDiscussion = (reviewId: number, outcome: string) => apiSend<ReviewView>('POST', `/api/review/reviews/${reviewId}/close`, { outcome });
export const listDiscussion = (hospitalId?: number) => apiGet<{ items: DiscussionItem[] }>(`/api/review/discussion${query({ hospitalId })}`);
export const getCompliance = (request: { hospitalId?: number; from?: string; to?: string; timeZone?: string }) => apiGet<ComplianceReport>(`/api/review/compliance${query(request)}`);
export const checkAuditChain = () => apiGet<AuditChainStatus>('/api/review/audit-chain');
export const getResponseSettings = (hospitalId: number) => apiGet<ResponseSettings>(`/api/review/settings${query({ hospitalId })}`);
export const saveResponseSettings = (settings: ResponseSettings) => apiSend<ResponseSettings>('PUT', '/api/review/settings', settings);
