import { apiGet, apiSend } from './http';
import type { BayView } from '@shared/schemas/bays';

export type { BayView };
export const getBays = async (hospitalId: number) => (await apiGet<{ bays: BayView[] }>(`/api/hospitals/${encodeURIComponent(hospitalId)}/bays`)).bays;
export const putBays = async (hospitalId: number, bays: string[]) => (await apiSend<{ bays: BayView[] }>('PUT', `/api/hospitals/${encodeURIComponent(hospitalId)}/bays`, { bays })).bays;
