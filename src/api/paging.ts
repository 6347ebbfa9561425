import { apiGet, apiSend } from './http';
import type { PagingContact, PagingPlan, PagingStatus, SentMessage } from '@shared/schemas/paging';

export interface PagingPerson { id: number; name: string; email: string; contact: PagingContact }
export interface PagingSettings { plan: PagingPlan; people: PagingPerson[]; sms: { local: boolean; from: string } }
export interface PageInterval { caseId: number; caseNumber: string; hospital: string; pagedAt: number; minutes: number | null; targetMinutes: number; met: boolean }

export const getPagingSettings = (hospitalId: number) => apiGet<PagingSettings>(`/api/paging/hospitals/${hospitalId}`);
export const savePagingPlan = (hospitalId: number, plan: PagingPlan) => apiSend<PagingSettings>('PUT', `/api/paging/hospitals/${hospitalId}/plan`, plan);
export const savePagingContact = (userId: number, contact: PagingContact) => apiSend<PagingContact>('PUT', `/api/paging/contacts/${userId}`, contact);
export const getBoardPaging = (hospitalId: number) => apiGet<PagingStatus[]>(`/api/paging/board?hospitalId=${hospitalId}`);
export const getPageIntervals = (q: { hospitalId?: number; from?: string; to?: string }) =>
  apiGet<PageInterval[]>(`/api/paging/intervals?${new URLSearchParams(Object.entries(q).filter(([, v]) => v != null && v !== '').map(([k, v]) => [k, String(v)])).toString()}`);
export const listMessages = (limit = 200) => apiGet<{ mailLocal: boolean; smsLocal: boolean; smsFakeUrl: string | null; messages: SentMessage[] }>(`/api/messages?limit=${limit}`);
