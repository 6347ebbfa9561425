import type { Role } from './api/me';

/** Role names as people say them, singular for "your role is …" and plural for "this screen is for …". */
const ROLE_NAMES: Record<Role, { one: string; many: string }> = {
  paramedic: { one: 'paramedic', many: 'paramedics' },
  charge_nurse: { one: 'charge nurse', many: 'charge nurses' },
  trauma_lead: { one: 'trauma lead', many: 'trauma leads' },
  quality: { one: 'quality team', many: 'the quality team' },
  admin: { one: 'administrator', many: 'administrators' },
};

const listFormat = new Intl.ListFormat('en', { style: 'long', type: 'conjunction' });

export function roleName(role: Role): string {
  return ROLE_NAMES[role]?.one ?? role;
}

export function roleNames(roles: readonly Role[]): string {
  return listFormat.format(roles.map(roleName));
}

export function roleAudience(roles: readonly Role[]): string {
  return listFormat.format(roles.map((role) => ROLE_NAMES[role]?.many ?? role));
}
