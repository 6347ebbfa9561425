// A database made before the server starts: the demo scenario plus invented extra EDs, crews and
// nurses, so the load spreads over a region as it would in life.
import { createDb, migrate } from '../../../server/db';
import { hashPassword } from '../../../server/auth/passwords';
import { DEMO_PASSWORD, seedDemo } from '../../../server/services/demo/seed';
import { systemClock } from '../../../server/deps';
import { databaseFileOf } from './child-server';

export interface BenchRegion {
  agencyId: number;
  unitIds: number[];
  hospitals: Array<{ id: number; name: string; nurseEmail: string }>;
  paramedicEmails: string[];
}

// Invented names [ours]; no real place.
const EXTRA_HOSPITALS = ['Kestrel Vale Hospital', 'Saltmarsh District Hospital', 'Orrin Bridge Hospital', 'Tamsworth Moor Hospital'];

export async function prepareRegion(dataDir: string, opts: { hospitals: number; paramedics: number }): Promise<BenchRegion> {
  const db = createDb(databaseFileOf(dataDir));
  try {
    await migrate(db);
    const ids = await seedDemo(db, systemClock);
    const at = Date.now();
    const passwordHash = await hashPassword(DEMO_PASSWORD);
    return await db.transaction(async (trx) => {
      const addUser = async (email: string, name: string, role: string, place: { hospital_id?: number; agency_id?: number }) => {
        const [user] = await trx('users').insert({ email, name, password_hash: passwordHash, active: true, created_at: at }).returning('id');
        await trx('user_roles').insert({ user_id: user.id, role });
        await trx('memberships').insert({ user_id: user.id, hospital_id: null, agency_id: null, ...place });
      };
      const hospitals: BenchRegion['hospitals'] = [{ id: ids.hospitals.general, name: 'Alderwick General Hospital', nurseEmail: 'nurse@plumbline.test' }];
      for (const name of EXTRA_HOSPITALS.slice(0, Math.max(0, opts.hospitals - 1))) {
        const [row] = await trx('hospitals').insert({ name, short_name: name.replace(/ Hospital$/, ''), trauma_level: 'II', height_unit: 'm', escalation_minutes: 60, created_at: at }).returning('id');
        await trx('agency_hospitals').insert({ agency_id: ids.agency, hospital_id: row.id });
        const nurseEmail = `nurse-${row.id}@bench.plumbline.test`;
        await addUser(nurseEmail, `Bench nurse ${row.id}`, 'charge_nurse', { hospital_id: row.id });
        hospitals.push({ id: row.id, name, nurseEmail });
      }
      // The benchmark measures delivery; hundreds of unacknowledged test cases paging an
      // escalation list would measure the mail catcher instead [ours].
      await trx('hospitals').update({ escalation_minutes: 60 });
      const paramedicEmails = ['paramedic@plumbline.test'];
      for (let i = 1; i < opts.paramedics; i++) {
        const email = `medic-${i}@bench.plumbline.test`;
        await addUser(email, `Bench paramedic ${i}`, 'paramedic', { agency_id: ids.agency });
        paramedicEmails.push(email);
      }
      return { agencyId: ids.agency, unitIds: ids.units, hospitals, paramedicEmails };
    });
  } finally {
    await db.destroy();
  }
}
