import { apiGet } from './http';
import type { CrewDestinations } from '@shared/schemas/crew';

export type { CrewDestination, CrewDestinations, CrewUnit } from '@shared/schemas/crew';

export const getDestinations = () => apiGet<CrewDestinations>('/api/crew/destinations');
