import type { Knex } from 'knex';
import type { Me } from '../../../shared/roles';
import type { CrewDestinations } from '../../../shared/schemas/crew';
import type { CaseEventView, CaseSummary, CrewCaseEventView } from '../../../shared/schemas/cases';
import { agencyIdsOf, hospitalIdsOf } from '../../auth/guards';
import { forbidden } from '../../errors';
import { CREW_EVENT_KINDS } from '../../../shared/schemas/case-events';
import { policyInForce } from '../policies/policies';

/** The destinations and active units of the paramedic's own agencies, never another agency's. */
export async function crewDestinations(db: Knex, me: Me, at: number): Promise<CrewDestinations> {
  const agencyIds = agencyIdsOf(me);
  if (!agencyIds.length) throw forbidden('You are not a member of any ambulance agency.');
  const agencies = await db('agencies').whereIn('id', agencyIds).orderBy('name').select('id', 'name');
  const links = await db('agency_hospitals as ah')
    .join('hospitals as h', 'h.id', 'ah.hospital_id')
    .whereIn('ah.agency_id', agencyIds)
    .orderBy('h.name')
    .select('h.id', 'h.name', 'h.short_name', 'h.trauma_level', 'h.height_unit', 'ah.agency_id');
  const hospitals = new Map<number, CrewDestinations['hospitals'][number]>();
  for (const link of links) {
    const known = hospitals.get(link.id);
    if (known) {
      known.agencyIds.push(link.agency_id);
      continue;
    }
    hospitals.set(link.id, {
      id: link.id,
      name: link.name,
      shortName: link.short_name,
      traumaLevel: link.trauma_level,
      heightUnit: link.height_unit,
      agencyIds: [link.agency_id],
      policy: await policyInForce(db, link.id, at),
    });
  }
  const units = await db('units').whereIn('agency_id', agencyIds).andWhere({ active: true }).orderBy('call_sign').select('id', 'call_sign', 'agency_id');
  return {
    agencies: agencies.map((a) => ({ id: a.id, name: a.name })),
    hospitals: [...hospitals.values()],
    units: units.map((u) => ({ id: u.id, callSign: u.call_sign, agencyId: u.agency_id })),
  };
}

// ---- What a crew reads of a case

/**
 * A case as its crew sees it: the clinical content, the acknowledgement, the level decided and the
 * bay. The nurse's reason for the level stays with the hospital; pages, escalations and reviews
 * are not in a summary at all.
 */
export function crewView(summary: CaseSummary): CaseSummary {
  return summary.decidedReason === null ? summary : { ...summary, decidedReason: null };
}

/** The crew's timeline of a case: its steps, who took them and when, without what the hospital wrote. */
export function crewEvents(events: CaseEventView[]): CrewCaseEventView[] {
  return events.filter((event) => CREW_EVENT_KINDS.has(event.kind)).map((event) => ({ ...event, data: null }));
}

/** Whether this reader sees the case only as its crew: through their agency, not its hospital. */
export const readsAsCrew = (me: Me, summary: Pick<CaseSummary, 'hospital'>) => !hospitalIdsOf(me).includes(summary.hospital.id);
