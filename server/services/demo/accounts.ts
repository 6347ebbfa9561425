import type { Role } from '../../../shared/roles';

// The demo scenario's accounts, on their own so the sign-in page can list them without loading the seed.
export const demoAccounts: Array<{ email: string; name: string; roles: Role[]; label: string }> = [
  { email: 'paramedic@plumbline.test', name: 'Robin Vasquez-Hale', roles: ['paramedic'], label: 'paramedic, Alderwick County Ambulance' },
  { email: 'nurse@plumbline.test', name: 'Morgan Achterberg', roles: ['charge_nurse'], label: 'charge nurse, Alderwick General' },
  { email: 'fenmoor.nurse@plumbline.test', name: 'Ilse Brannagh', roles: ['charge_nurse'], label: 'charge nurse, Fenmoor Community' },
  { email: 'lead@plumbline.test', name: 'Dr. Sasha Imbert', roles: ['trauma_lead'], label: 'trauma lead, Alderwick General' },
  { email: 'quality@plumbline.test', name: 'Jules Oyelaran', roles: ['quality'], label: 'quality team, Alderwick General' },
  { email: 'admin@plumbline.test', name: 'Kit Marchetti', roles: ['admin'], label: 'administrator, all of Alderwick County' },
];
