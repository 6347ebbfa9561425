import type { Knex } from 'knex';
import { hashPassword } from '../../auth/passwords';
import type { Clock } from '../../deps';
import { seedNotificationLists } from '../people/people';
import { seedBays } from '../board/bays';
import { seedDemoReviews } from './review';
import { seedBoardDemo } from './board';
import { seedDemoOutcomes } from './quality';
import { seedProgrammeAddress } from '../audit/checkpoints';
import { demoAccounts } from './accounts';
import type { DemoIds } from './ids';

export type { DemoIds };

// The invented demo scenario: Alderwick County, one Level I trauma centre, one community
// hospital, one county ambulance service. Every name here is made up.
export const DEMO_PASSWORD = 'demo';

export { demoAccounts };

export async function isEmpty(db: Knex): Promise<boolean> {
  const row = await db('users').count({ n: '*' }).first();
  return Number(row?.n ?? 0) === 0;
}


export async function seedDemo(db: Knex, clock: Clock): Promise<DemoIds> {
  const at = clock.now();
  const passwordHash = await hashPassword(DEMO_PASSWORD);
  return db.transaction(async (trx) => {
    const [general] = await trx('hospitals')
      .insert({ name: 'Alderwick General Hospital', short_name: 'Alderwick General', trauma_level: 'I', height_unit: 'ft', escalation_minutes: 2, created_at: at })
      .returning('id');
    const [community] = await trx('hospitals')
      .insert({ name: 'Fenmoor Community Hospital', short_name: 'Fenmoor Community', trauma_level: 'none', height_unit: 'm', escalation_minutes: 3, created_at: at })
      .returning('id');
    const [agency] = await trx('agencies').insert({ name: 'Alderwick County Ambulance Service', created_at: at }).returning('id');
    const hospitals = { general: general.id as number, community: community.id as number };
    await trx('agency_hospitals').insert([
      { agency_id: agency.id, hospital_id: hospitals.general },
      { agency_id: agency.id, hospital_id: hospitals.community },
    ]);
    const units: number[] = [];
    for (const callSign of ['Medic 11', 'Medic 12', 'Medic 14', 'Medic 21', 'Rescue 3']) {
      const [unit] = await trx('units').insert({ agency_id: agency.id, call_sign: callSign, active: true }).returning('id');
      units.push(unit.id);
    }
    const users: Record<string, number> = {};
    for (const account of demoAccounts) {
      const [user] = await trx('users').insert({ email: account.email, name: account.name, password_hash: passwordHash, active: true, created_at: at }).returning('id');
      users[account.email] = user.id;
      await trx('user_roles').insert(account.roles.map((role) => ({ user_id: user.id, role })));
    }
    const member = (email: string, place: { hospital_id?: number; agency_id?: number }) => ({ user_id: users[email], hospital_id: null, agency_id: null, ...place });
    await trx('memberships').insert([
      member('paramedic@plumbline.test', { agency_id: agency.id }),
      member('nurse@plumbline.test', { hospital_id: hospitals.general }),
      member('fenmoor.nurse@plumbline.test', { hospital_id: hospitals.community }),
      member('lead@plumbline.test', { hospital_id: hospitals.general }),
      member('quality@plumbline.test', { hospital_id: hospitals.general }),
      member('admin@plumbline.test', { hospital_id: hospitals.general }),
      member('admin@plumbline.test', { hospital_id: hospitals.community }),
      member('admin@plumbline.test', { agency_id: agency.id }),
    ]);
    const ids: DemoIds = { hospitals, agency: agency.id, units, users };
    for (const extend of demoExtensions) await extend(trx, ids, clock);
    return ids;
  });
}

/** Later features add their demo records (past cases, outcomes, policies) through these. */
export const demoExtensions: Array<(db: Knex, ids: DemoIds, clock: Clock) => Promise<void>> = [seedNotificationLists, seedBays, seedBoardDemo, seedDemoReviews, seedDemoOutcomes, seedProgrammeAddress];
