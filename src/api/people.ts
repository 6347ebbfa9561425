import { apiGet, apiSend } from './http';
import type { AgencyFields, AgencyRow, CreateUser, HospitalFields, HospitalRow, PersonRow, UpdateHospital, UpdateUnit, UpdateUser } from '@shared/schemas/people';

export type { AgencyRow, HospitalRow, PersonRow };
export interface AgencyListing { agencies: AgencyRow[]; hospitals: Array<{ id: number; name: string }> }

export const listPeople = () => apiGet<PersonRow[]>('/api/people/users');
export const createPerson = (request: CreateUser) => apiSend<PersonRow>('POST', '/api/people/users', request);
export const updatePerson = (id: number, request: UpdateUser) => apiSend<PersonRow>('PATCH', `/api/people/users/${id}`, request);
export const setPassword = (id: number, password: string) => apiSend<PersonRow>('POST', `/api/people/users/${id}/password`, { password });
export const setPersonActive = (id: number, active: boolean) => apiSend<PersonRow>('POST', `/api/people/users/${id}/${active ? 'reactivate' : 'deactivate'}`, {});

export const listHospitals = () => apiGet<HospitalRow[]>('/api/people/hospitals');
export const createHospital = (fields: HospitalFields) => apiSend<HospitalRow>('POST', '/api/people/hospitals', fields);
export const updateHospital = (id: number, fields: UpdateHospital) => apiSend<HospitalRow>('PATCH', `/api/people/hospitals/${id}`, fields);

export const listAgencies = () => apiGet<AgencyListing>('/api/people/agencies');
export const createAgency = (fields: AgencyFields) => apiSend<AgencyRow>('POST', '/api/people/agencies', fields);
export const updateAgency = (id: number, fields: AgencyFields) => apiSend<AgencyRow>('PATCH', `/api/people/agencies/${id}`, fields);
export const addUnit = (agencyId: number, callSign: string) => apiSend<AgencyRow>('POST', `/api/people/agencies/${agencyId}/units`, { callSign });
export const updateUnit = (unitId: number, fields: UpdateUnit) => apiSend<AgencyRow>('PATCH', `/api/people/units/${unitId}`, fields);
export const setDestinations = (agencyId: number, hospitalIds: number[]) => apiSend<AgencyRow>('PUT', `/api/people/agencies/${agencyId}/destinations`, { hospitalIds });
