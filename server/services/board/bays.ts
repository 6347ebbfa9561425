import type { Knex } from 'knex';
import type { Me } from '../../../shared/roles';
import { OPEN_STATES } from '../../../shared/schemas/cases';
import type { BayView } from '../../../shared/schemas/bays';
import { assertHospital, roleFor } from '../../auth/guards';
import { appendAudit } from '../audit/audit';

/** The hospital's bays in order, each with the open cases assigned to it (more than one is a double booking). */
export async function listBays(db: Knex, hospitalId: number): Promise<BayView[]> {
  const bays = (await db('hospital_bays').where({ hospital_id: hospitalId }).orderBy('position').pluck('name')) as string[];
  const taken = (await db('cases').where({ hospital_id: hospitalId }).whereIn('state', OPEN_STATES).whereNotNull('bay').orderBy('id').select('id', 'case_number', 'bay')) as Array<{ id: number; case_number: string; bay: string }>;
  const key = (name: string) => name.trim().toLowerCase();
  const views: BayView[] = bays.map((name) => ({ name, occupiedBy: [] }));
  const byKey = new Map(views.map((v) => [key(v.name), v]));
  for (const row of taken) {
    let view = byKey.get(key(row.bay));
    // A bay typed by hand that is not on the list still shows, so nothing is occupied unseen.
    if (!view) byKey.set(key(row.bay), (view = { name: row.bay, occupiedBy: [] })) && views.push(view);
    view.occupiedBy.push({ caseId: row.id, caseNumber: row.case_number });
  }
  return views;
}

/** The open cases other than `caseId` in this bay at this hospital. */
export async function casesInBay(db: Knex, hospitalId: number, bay: string, caseId: number): Promise<Array<{ id: number; case_number: string }>> {
  return db('cases')
    .where({ hospital_id: hospitalId })
    .whereIn('state', OPEN_STATES)
    .whereNot({ id: caseId })
    .whereRaw('lower(trim(bay)) = ?', [bay.trim().toLowerCase()])
    .select('id', 'case_number');
}

export async function setBays(db: Knex, me: Me, hospitalId: number, bays: string[], at: number): Promise<BayView[]> {
  assertHospital(me, hospitalId);
  await db.transaction(async (trx) => {
    const before = await trx('hospital_bays').where({ hospital_id: hospitalId }).orderBy('position').pluck('name');
    await trx('hospital_bays').where({ hospital_id: hospitalId }).delete();
    if (bays.length) await trx('hospital_bays').insert(bays.map((name, position) => ({ hospital_id: hospitalId, name, position })));
    await appendAudit(trx, { at, actor: { id: me.user.id, role: roleFor(me, 'bays.edit') }, action: 'hospital.bays-set', entity: 'hospital', entityId: hospitalId, before: { bays: before }, after: { bays } });
  });
  return listBays(db, hospitalId);
}

/** Demo: the bays of both invented hospitals. */
export async function seedBays(db: Knex, ids: { hospitals: { general: number; community: number } }): Promise<void> {
  const rows = [
    ...['Resus 1', 'Resus 2', 'Resus 3', 'Resus 4', 'Majors 1', 'Majors 2'].map((name, position) => ({ hospital_id: ids.hospitals.general, name, position })),
    ...['Resus A', 'Resus B', 'Cubicle 1'].map((name, position) => ({ hospital_id: ids.hospitals.community, name, position })),
  ];
  await db('hospital_bays').insert(rows);
}
