import { apiGet, apiSend } from './http';
import type { IssuedMachineClient, MachineClientView, RegisterMachineClient } from '@shared/schemas/machine-clients';

export type { IssuedMachineClient, MachineClientView };
export interface MachineClientListing { clients: MachineClientView[]; tokenEndpoint: string | null }

export const listMachineClients = () => apiGet<MachineClientListing>('/api/people/machine-clients');
export const registerMachineClient = (request: RegisterMachineClient) => apiSend<IssuedMachineClient>('POST', '/api/people/machine-clients', request);
export const revokeMachineClient = (id: number) => apiSend<MachineClientView>('POST', `/api/people/machine-clients/${id}/revoke`, {});
