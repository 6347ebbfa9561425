import type { Knex } from 'knex';
import type { Role } from '../../shared/roles';
import { hashPassword } from '../../server/auth/passwords';

/** Invented, like the demo: a second county whose people must never reach Alderwick's records. */
export const FOREIGN_PASSWORD = 'elsewhere';

export const foreignAccounts: ReadonlyArray<{ email: string; name: string; role: Role; place: 'hospital' | 'agency' }> = [
  { email: 'nurse@brackwater.test', name: 'Tamsin Orrell', role: 'charge_nurse', place: 'hospital' },
  { email: 'lead@brackwater.test', name: 'Dr. Ilse Penhaligon', role: 'trauma_lead', place: 'hospital' },
  { email: 'quality@brackwater.test', name: 'Ravi Dunstable', role: 'quality', place: 'hospital' },
  { email: 'admin@brackwater.test', name: 'Noor Castellane', role: 'admin', place: 'hospital' },
  { email: 'paramedic@brackwater.test', name: 'Ewan Threlkeld', role: 'paramedic', place: 'agency' },
];

export interface ForeignRegion { hospitalId: number; agencyId: number; unitId: number; users: Record<string, number> }

/**
 * Brackwater Infirmary and Brackwater Valley Ambulance, written straight into the database: the
 * hospital's people are members of it alone, the crew of the agency alone, and the agency takes
 * patients only to Brackwater. The foreign admin administers the hospital and the agency.
 */
export async function createForeignRegion(db: Knex, at = Date.now()): Promise<ForeignRegion> {
  const passwordHash = await hashPassword(FOREIGN_PASSWORD);
  return db.transaction(async (trx) => {
    const [hospital] = await trx('hospitals').insert({ name: 'Brackwater Infirmary', short_name: 'Brackwater', trauma_level: 'II', height_unit: 'm', escalation_minutes: 3, created_at: at }).returning('id');
    const [agency] = await trx('agencies').insert({ name: 'Brackwater Valley Ambulance', created_at: at }).returning('id');
    await trx('agency_hospitals').insert({ agency_id: agency.id, hospital_id: hospital.id });
    const [unit] = await trx('units').insert({ agency_id: agency.id, call_sign: 'Valley 2', active: true }).returning('id');
    const users: Record<string, number> = {};
    for (const account of foreignAccounts) {
      const [user] = await trx('users').insert({ email: account.email, name: account.name, password_hash: passwordHash, active: true, created_at: at }).returning('id');
      users[account.role] = user.id;
      await trx('user_roles').insert({ user_id: user.id, role: account.role });
      await trx('memberships').insert({ user_id: user.id, hospital_id: account.place === 'hospital' ? hospital.id : null, agency_id: account.place === 'agency' ? agency.id : null });
    }
    await trx('memberships').insert({ user_id: users.admin, hospital_id: null, agency_id: agency.id });
    return { hospitalId: hospital.id, agencyId: agency.id, unitId: unit.id, users };
  });
}
