import type { Knex } from 'knex';
import type { Me } from '../../../shared/roles';
import type { ComplianceMonth, ComplianceQuery, ComplianceReport } from '../../../shared/schemas/review';
import { wilsonInterval } from '../../../shared/quality/wilson';
import { forbidden } from '../../errors';
import { rangeOf, scopeHospitals } from './reviews';
import { addMonths, monthOf } from '../../../shared/days';
import { getSetting } from '../people/settings';


// Response-time compliance: of the highest-level activations that arrived, the share with the
// team leader at the bedside within the target after arrival, per month of arrival.
// Standard: 15 minutes [source: Ingraham A et al.], 80 % of cases [memory]; both are settings.
// An activation with no bedside time recorded counts against compliance [trade: what is not
// documented was not done], and is shown apart so the lead can chase the record.

interface Counts { activations: number; met: number; late: number; notRecorded: number }

function summarise(counts: Counts, targetShare: number): Omit<ComplianceMonth, 'month'> {
  const share = counts.activations ? counts.met / counts.activations : null;
  return {
    ...counts,
    share,
    interval: wilsonInterval(counts.met, counts.activations),
    meetsTarget: share === null ? null : share >= targetShare,
  };
}

export async function complianceReport(db: Knex, me: Me, q: ComplianceQuery): Promise<ComplianceReport> {
  const [hospitalId] = scopeHospitals(me, q.hospitalId);
  if (hospitalId === undefined) throw forbidden('You are not a member of any hospital.');
  const hospital = await db('hospitals').where({ id: hospitalId }).first('id', 'name');
  const targetMinutes = await getSetting<number>(db, 'response.targetMinutes', hospitalId);
  const targetShare = await getSetting<number>(db, 'response.compliance', hospitalId);
  const { start, end } = rangeOf(q);

  const query = db('cases')
    .where({ hospital_id: hospitalId, decided_level: 'full' })
    .whereNot('state', 'cancelled')
    .whereNotNull('arrived_at')
    .select('arrived_at', 'team_at_bedside_at');
  if (start !== null) query.where('arrived_at', '>=', start);
  if (end !== null) query.where('arrived_at', '<', end);
  const rows = await query;

  const byMonth = new Map<string, Counts>();
  const total: Counts = { activations: 0, met: 0, late: 0, notRecorded: 0 };
  for (const row of rows) {
    const month = monthOf(Number(row.arrived_at), q.timeZone);
    const counts = byMonth.get(month) ?? { activations: 0, met: 0, late: 0, notRecorded: 0 };
    const outcome = row.team_at_bedside_at == null ? 'notRecorded' : Number(row.team_at_bedside_at) - Number(row.arrived_at) <= targetMinutes * 60_000 ? 'met' : 'late';
    for (const c of [counts, total]) {
      c.activations++;
      c[outcome]++;
    }
    byMonth.set(month, counts);
  }

  // Every month of the range (or from the first to the last activation) appears, empty ones too,
  // so a month without a single highest-level activation is not mistaken for a missing report.
  const keys = [...byMonth.keys()].sort();
  const first = q.from ? q.from.slice(0, 7) : keys[0];
  const last = q.to ? q.to.slice(0, 7) : keys[keys.length - 1];
  const months: ComplianceMonth[] = [];
  if (first && last) {
    for (let key = first; key <= last && months.length < 240; key = addMonths(key, 1)) {
      months.push({ month: key, ...summarise(byMonth.get(key) ?? { activations: 0, met: 0, late: 0, notRecorded: 0 }, targetShare) });
    }
  }
  return { hospital: { id: hospital.id, name: hospital.name }, targetMinutes, targetShare, months, overall: summarise(total, targetShare) };
}
