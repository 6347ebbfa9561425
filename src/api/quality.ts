import { apiGet, apiSend, apiUpload } from './http';
import type {
  Drilldown, DrilldownRequest, ImportPreview, ImportResult, QualityReport, ReportRequest, Targets, TargetsInput,
  WhatIfPolicyChoice, WhatIfRequest, WhatIfResult,
} from '@shared/schemas/quality';

export type { Drilldown, DrilldownRequest, ImportPreview, ImportResult, QualityReport, ReportRequest, Targets, WhatIfPolicyChoice, WhatIfRequest, WhatIfResult };

function queryOf(params: object): string {
  const search = new URLSearchParams();
  for (const [key, value] of Object.entries(params)) if (value !== undefined && value !== null && value !== '') search.set(key, String(value));
  return search.toString();
}

export const getReport = (request: ReportRequest) => apiGet<QualityReport>(`/api/quality/report?${queryOf(request)}`);
export const getDrilldown = (request: DrilldownRequest) => apiGet<Drilldown>(`/api/quality/cases?${queryOf(request)}`);
/** Addresses the browser downloads itself (a link with `download`), so they are built here. */
export const reportCsvHref = (request: ReportRequest) => `/api/quality/report.csv?${queryOf(request)}`;
export const templateHref = '/api/quality/outcomes/template.csv';
export const caseTimelineRoute = (caseId: number) => `/review/cases/${caseId}`;

function outcomeForm(hospitalId: number, file: File): FormData {
  const form = new FormData();
  form.set('hospitalId', String(hospitalId));
  form.set('file', file, file.name);
  return form;
}
export const previewOutcomes = (hospitalId: number, file: File) => apiUpload<ImportPreview>('/api/quality/outcomes/preview', outcomeForm(hospitalId, file));
export const importOutcomes = (hospitalId: number, token: string) => apiSend<ImportResult>('POST', '/api/quality/outcomes/import', { hospitalId, token });

export const listWhatIfPolicies = (hospitalId: number) => apiGet<{ policies: WhatIfPolicyChoice[] }>(`/api/quality/policies?${queryOf({ hospitalId })}`);
export const runWhatIf = (request: WhatIfRequest) => apiSend<WhatIfResult>('POST', '/api/quality/what-if', request);

export const getTargets = (hospitalId: number) => apiGet<{ targets: Targets }>(`/api/quality/targets?${queryOf({ hospitalId })}`);
export const saveTargets = (hospitalId: number, targets: TargetsInput) => apiSend<{ targets: Targets }>('PUT', '/api/quality/targets', { hospitalId, targets });
