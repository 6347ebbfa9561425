import dayjs from 'dayjs';
import type { Knex } from 'knex';
import type { CaseSummary } from '../../shared/schemas/cases';
import { formatAgeSex, formatFallHeight, levelName, type BoardLevel } from '../../shared/schemas/board';
import { firstImpactOptions, surfaceOptions } from '../../shared/schemas/clinical';
import type { LevelId } from '../../shared/triage/policy';
import type { OutgoingMail } from '../mail';

// What a page and an escalation notice say. They go to distribution lists and often to phones
// on a lock screen, so they carry no patient identifier beyond age and sex, and never the
// crew's free-text notes (a name could be in them).

export type NotificationList = 'full' | 'limited' | 'consult' | 'escalation';

/** The addresses on one of a hospital's lists, as People & places keeps them. */
export async function notificationList(db: Knex, hospitalId: number, list: NotificationList): Promise<string[]> {
  const rows = await db('notification_lists').where({ hospital_id: hospitalId, list }).orderBy('email').select('email');
  return rows.map((r) => r.email as string);
}

const clockTime = (at: number) => dayjs(at).format('HH:mm');
const labelOf = (options: readonly { id: string; label: string }[], id: string | null | undefined) => options.find((o) => o.id === id)?.label ?? 'not known';

function etaLine(summary: CaseSummary, now: number): string {
  if (summary.arrivedAt) return `Arrived ${clockTime(summary.arrivedAt)}`;
  if (summary.etaAt == null) return 'ETA not given';
  const minutes = Math.max(0, Math.round((summary.etaAt - now) / 60_000));
  return `ETA ${clockTime(summary.etaAt)} (in ${minutes} min)`;
}

function patientLines(summary: CaseSummary): string[] {
  const input = summary.latest.input;
  const v = input.vitals ?? {};
  const vitals = [
    v.sbp != null ? `SBP ${v.sbp}` : null,
    v.hr != null ? `HR ${v.hr}` : null,
    v.rr != null ? `RR ${v.rr}` : null,
    v.spo2 != null ? `SpO2 ${v.spo2} %` : null,
    v.gcsTotal != null ? `GCS ${v.gcsTotal}` : v.gcs?.eye != null && v.gcs.verbal != null && v.gcs.motor != null ? `GCS ${v.gcs.eye + v.gcs.verbal + v.gcs.motor}` : null,
  ].filter(Boolean);
  return [
    `Patient: ${formatAgeSex(input.ageYears, input.sex)}`,
    `Fall: ${formatFallHeight(input.fall.heightM, summary.hospital.heightUnit)}, onto ${labelOf(surfaceOptions, input.fall.surface).toLowerCase()}, first impact ${labelOf(firstImpactOptions, input.fall.firstImpact).toLowerCase()}`,
    `Latest vitals: ${vitals.length ? vitals.join(', ') : 'none recorded'}`,
  ];
}

function criteriaLines(summary: CaseSummary): string[] {
  const criteria = summary.latest.result.criteria;
  if (!criteria.length) return ['Criteria met: none'];
  return ['Criteria met:', ...criteria.map((c) => `- ${c.label} (${c.because})`)];
}

/** The page to the decided level's list: level, ETA, bay and criteria first, in that order. */
export function composePage(summary: CaseSummary, level: LevelId, levels: readonly BoardLevel[], now: number): Omit<OutgoingMail, 'to'> {
  const name = levelName(levels, level);
  const bay = summary.bay ?? 'bay not yet assigned';
  const eta = etaLine(summary, now);
  const recommended = summary.recommendedLevel !== level ? `Recommended by the policy: ${levelName(levels, summary.recommendedLevel)}` : null;
  return {
    subject: `${name}: ${eta}, ${bay} (${summary.hospital.name}, case ${summary.caseNumber})`,
    text: [
      `${name} activation at ${summary.hospital.name}.`,
      '',
      `Level: ${name}`,
      recommended,
      `${eta}`,
      `Bay: ${bay}`,
      ...patientLines(summary),
      ...criteriaLines(summary),
      '',
      `Case ${summary.caseNumber}, ${summary.unit ? summary.unit.callSign + ', ' : ''}${summary.agency.name}. Policy ${summary.policy.id}@${summary.policy.version}${summary.policy.example ? ' (example, not locally approved)' : ''}.`,
      'Decision support only: local policy and medical direction prevail.',
    ].filter((line) => line !== null).join('\n'),
  };
}

/** The notice to the escalation list when nobody has acknowledged a pre-alert in time. */
export function composeEscalation(summary: CaseSummary, minutes: number, levels: readonly BoardLevel[], now: number): Omit<OutgoingMail, 'to'> {
  const name = levelName(levels, summary.recommendedLevel);
  return {
    subject: `Not acknowledged after ${minutes} min: ${name} recommended, ${etaLine(summary, now)} (${summary.hospital.name}, case ${summary.caseNumber})`,
    text: [
      `A pre-alert to ${summary.hospital.name} has not been acknowledged on the Inbound board for ${minutes} minutes.`,
      `Received ${clockTime(summary.createdAt)}. Please check the board now.`,
      '',
      `Recommended level: ${name}`,
      etaLine(summary, now),
      ...patientLines(summary),
      ...criteriaLines(summary),
      '',
      `Case ${summary.caseNumber}, ${summary.unit ? summary.unit.callSign + ', ' : ''}${summary.agency.name}.`,
    ].join('\n'),
  };
}
