import { apiGet, apiSend } from './http';
import type { Policy } from '@shared/triage/policy';
import type { ApproveVersion, CreateDraft, LocalPreview, LocalPreviewQuery, LooseningWarning, PolicyVersionSummary, PublishVersion, SaveDraft } from '@shared/schemas/policies';

export type { LocalPreview, LooseningWarning, PolicyVersionSummary };
export interface PolicyVersionDetail extends PolicyVersionSummary {
  document: Policy;
  warnings: LooseningWarning[];
  looseningAcknowledged: LooseningWarning[] | null;
}

export interface HospitalPolicies {
  hospital: { id: number; name: string; heightUnit: 'm' | 'ft' | 'storeys' };
  inForce: { policyId: string; version: number; name: string; example: boolean; versionId: number | null };
  versions: PolicyVersionSummary[];
}

export const listPolicyVersions = (hospitalId: number) => apiGet<HospitalPolicies>(`/api/policies?hospitalId=${encodeURIComponent(hospitalId)}`);
export const getPolicyVersion = (id: number) => apiGet<PolicyVersionDetail>(`/api/policies/${id}`);
export const createDraft = (request: CreateDraft) => apiSend<PolicyVersionDetail>('POST', '/api/policies', request);
export const saveDraft = (id: number, edit: SaveDraft) => apiSend<PolicyVersionDetail>('PUT', `/api/policies/${id}`, edit);
export const discardDraft = (id: number) => apiSend<void>('DELETE', `/api/policies/${id}`);
export const approveVersion = (id: number, request: ApproveVersion) => apiSend<PolicyVersionDetail>('POST', `/api/policies/${id}/approve`, request);
export const previewLocalCondition = (query: LocalPreviewQuery) => apiSend<LocalPreview>('POST', '/api/policies/local-preview', query);
export const publishVersion = (id: number, request: PublishVersion) => apiSend<PolicyVersionDetail>('POST', `/api/policies/${id}/publish`, request);
