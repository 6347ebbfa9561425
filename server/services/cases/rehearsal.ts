import { randomUUID } from 'node:crypto';
import type { Knex } from 'knex';
import { PreAlert, PreAlertUpdate } from '../../../shared/schemas/cases';
import { rolesFor } from '../../../shared/access';
import { loadMe, roleFor } from '../../auth/guards';
import type { Clock } from '../../deps';
import { reviseCase, submitPreAlert } from './commands';
import { caseSummary } from './summary';

// Patients for the rehearsal only [ours]; they never reach a board or the database.
const REHEARSED = [
  { ageYears: 34, sex: 'male', fall: { heightM: 6.1, surface: 'concrete', headImpact: false }, vitals: { sbp: 84, hr: 120, rr: 24, spo2: 93, spo2RoomAir: true, gcsTotal: 14 } },
  { ageYears: 81, sex: 'female', anticoagulant: true, fall: { heightM: 0, surface: 'tile-stone', headImpact: true }, vitals: { sbp: 132, hr: 88, gcsTotal: 15 } },
  { ageYears: 52, sex: 'female', fall: { heightM: 3.5, surface: 'grass' }, vitals: { sbp: 128, hr: 92 } },
] as const;

class Rehearsed extends Error {}

/**
 * Runs the pre-alert path (check, evaluate, store, summarise, update) a few times before the
 * server listens, inside a transaction that is rolled back. After a restart the ambulances'
 * outboxes and the boards' reloads all arrive in the first second, and the first pre-alerts
 * would otherwise run as cold code while the JavaScript engine compiles it. Nothing survives:
 * the rollback takes back the cases, revisions, events, audit rows and ids, and the kept caches
 * skip transactions. Returns how many rounds ran; none when there is no paramedic to act as.
 */
export async function rehearsePreAlerts(db: Knex, clock: Clock, rounds = 12): Promise<number> {
  const crew = await db('users as u')
    .join('user_roles as r', 'r.user_id', 'u.id')
    .join('memberships as m', 'm.user_id', 'u.id')
    .join('agency_hospitals as ah', 'ah.agency_id', 'm.agency_id')
    .whereIn('r.role', rolesFor('pre-alerts.send'))
    .where({ 'u.active': true })
    .first('u.id as userId', 'ah.hospital_id as hospitalId');
  const me = crew && (await loadMe(db, crew.userId));
  if (!me) return 0;
  const actor = { me, role: roleFor(me, 'pre-alerts.send') };
  let done = 0;
  // One transaction a round: with several processes on one database, a rehearsal holds the
  // write (and the audit chain's turn) only as long as one pre-alert does.
  for (; done < rounds; done++) {
    try {
      await db.transaction(async (trx) => {
        const clinical = REHEARSED[done % REHEARSED.length];
        const payload = PreAlert.parse({ clientId: randomUUID(), hospitalId: crew.hospitalId, etaMinutes: 12, clinical });
        const { caseId } = await submitPreAlert(trx, clock, actor, payload);
        JSON.stringify(await caseSummary(trx, caseId));
        const update = PreAlertUpdate.parse({ caseId, etaMinutes: 8, clinical: { ...clinical, vitals: { ...clinical.vitals, sbp: 96 } } });
        await reviseCase(trx, clock, actor, update);
        JSON.stringify(await caseSummary(trx, caseId));
        throw new Rehearsed();
      });
    } catch (err) {
      if (!(err instanceof Rehearsed)) throw err;
    }
  }
  return done;
}
