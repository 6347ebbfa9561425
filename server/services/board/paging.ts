import type { Knex } from 'knex';
import type { CaseSummary } from '../../../shared/schemas/cases';
import { formatAgeSex, formatFallWithCriterion, handoverLines, levelName, type BoardLevel } from '../../../shared/schemas/board';
import { firstImpactOptions } from '../../../shared/schemas/clinical';
import { becauseInUnit } from '../../../shared/board/height-display';
import type { LevelId } from '../../../shared/triage/policy';
import type { OutgoingMail } from '../../mail';
import { getSetting } from '../people/settings';

export async function hospitalTimeZone(db: Knex, hospitalId: number): Promise<string> {
  const zone = await getSetting<string>(db, 'hospital.timeZone', hospitalId);
  try {
    new Intl.DateTimeFormat('en-GB', { timeZone: zone });
    return zone;
  } catch {
    return 'UTC';
  }
}

// What a page and an escalation notice say. They go to distribution lists and often to phones
// on a lock screen, so they carry no patient identifier beyond age and sex. The crew's notes and
// handover go in: the team prepares from them, and the form tells the crew where they go.

export type NotificationList = 'full' | 'limited' | 'consult' | 'escalation' | 'senior';

/** The addresses on one of a hospital's lists, as People & places keeps them. */
export async function notificationList(db: Knex, hospitalId: number, list: NotificationList): Promise<string[]> {
  const rows = await db('notification_lists').where({ hospital_id: hospitalId, list }).orderBy('email').select('email');
  return rows.map((r) => r.email as string);
}

/** How a message shows times: 24-hour, in the hospital's time zone, with the zone's short name. */
export interface MailClock { (at: number): string }

export function mailClock(timeZone: string): MailClock {
  const format = new Intl.DateTimeFormat('en-GB', { timeZone, hour: '2-digit', minute: '2-digit', hourCycle: 'h23', timeZoneName: 'short' });
  return (at) => format.format(at);
}

/** The hospital's time zone (a setting; the server's own zone until one is set). */
export async function hospitalClock(db: Knex, hospitalId: number): Promise<MailClock> {
  return mailClock(await hospitalTimeZone(db, hospitalId));
}

const UTC_CLOCK = mailClock('UTC');
const labelOf = (options: readonly { id: string; label: string }[], id: string | null | undefined) => options.find((o) => o.id === id)?.label ?? 'not known';

/** "ETA 14:05 GMT (in 6 min)", or once it has passed "ETA passed 4 min ago (14:05 GMT)". */
export function etaLine(summary: Pick<CaseSummary, 'arrivedAt' | 'etaAt'>, now: number, clock: MailClock = UTC_CLOCK): string {
  if (summary.arrivedAt) return `Arrived ${clock(summary.arrivedAt)}`;
  if (summary.etaAt == null) return 'ETA not given';
  const minutes = Math.round((summary.etaAt - now) / 60_000);
  if (minutes > 0) return `ETA ${clock(summary.etaAt)} (in ${minutes} min)`;
  if (minutes === 0) return `ETA now (${clock(summary.etaAt)})`;
  return `ETA passed ${-minutes} min ago (${clock(summary.etaAt)})`;
}

function patientLines(summary: CaseSummary, clock: MailClock): string[] {
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
    `Fall: ${formatFallWithCriterion(input, summary.latest.result.set, summary.hospital.heightUnit, 'landing surface not known')}, first impact ${labelOf(firstImpactOptions, input.fall.firstImpact).toLowerCase()}`,
    `Latest vitals: ${vitals.length ? vitals.join(', ') : 'none recorded'}`,
    ...handoverLines(input, clock).map((l) => `${l.label}: ${l.text}`),
    ...(summary.latest.notes ? [`Crew's notes: ${summary.latest.notes}`] : []),
  ];
}

function criteriaLines(summary: CaseSummary): string[] {
  const criteria = summary.latest.result.criteria;
  if (!criteria.length) return ['Criteria met: none'];
  return ['Criteria met:', ...criteria.map((c) => `- ${c.label} (${becauseInUnit(c, summary.hospital.heightUnit)})`)];
}

/** The page to the decided level's list: level, ETA, bay and criteria first, in that order. */
export function composePage(summary: CaseSummary, level: LevelId, levels: readonly BoardLevel[], now: number, clock: MailClock = UTC_CLOCK): Omit<OutgoingMail, 'to'> {
  const name = levelName(levels, level);
  const bay = summary.bay ?? 'bay not yet assigned';
  const eta = etaLine(summary, now, clock);
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
      ...patientLines(summary, clock),
      ...criteriaLines(summary),
      '',
      `Case ${summary.caseNumber}, ${summary.unit ? summary.unit.callSign + ', ' : ''}${summary.agency.name}. Policy ${summary.policy.id}@${summary.policy.version}${summary.policy.example ? ' (example, not locally approved)' : ''}.`,
      'Decision support only: local policy and medical direction prevail.',
    ].filter((line) => line !== null).join('\n'),
  };
}

export interface EscalationNotice { summary: CaseSummary; minutes: number; levels: readonly BoardLevel[] }

/** The notice to an escalation step's list when nobody has acknowledged a pre-alert in time. */
export function composeEscalation(notice: EscalationNotice, step: number, now: number, clock: MailClock = UTC_CLOCK): Omit<OutgoingMail, 'to'> {
  const { summary, minutes, levels } = notice;
  const name = levelName(levels, summary.recommendedLevel);
  return {
    subject: `Not acknowledged after ${minutes} min: ${name} recommended, ${etaLine(summary, now, clock)} (${summary.hospital.name}, case ${summary.caseNumber})`,
    text: [
      `A pre-alert to ${summary.hospital.name} has not been acknowledged on the Inbound board for ${minutes} minutes.`,
      `Received ${clock(summary.createdAt)}. Escalation step ${step}. Please check the board now.`,
      '',
      `Recommended level: ${name}`,
      etaLine(summary, now, clock),
      ...patientLines(summary, clock),
      ...criteriaLines(summary),
      '',
      `Case ${summary.caseNumber}, ${summary.unit ? summary.unit.callSign + ', ' : ''}${summary.agency.name}.`,
    ].join('\n'),
  };
}

/**
 * One e-mail for many overdue cases at one hospital and step: a flood of pre-alerts must not
 * become a flood of e-mails that buries the one that matters. The most urgent come first.
 */
export function composeEscalationDigest(hospitalName: string, notices: readonly EscalationNotice[], step: number, now: number, clock: MailClock = UTC_CLOCK): Omit<OutgoingMail, 'to'> {
  return {
    subject: `Not acknowledged: ${notices.length} pre-alerts waiting (${hospitalName}, escalation step ${step})`,
    text: [
      `${notices.length} pre-alerts to ${hospitalName} have not been acknowledged on the Inbound board. Please check the board now.`,
      `Escalation step ${step}, ${clock(now)}.`,
      '',
      ...notices.map(({ summary, minutes, levels }) =>
        `- Case ${summary.caseNumber}: ${levelName(levels, summary.recommendedLevel)} recommended, waiting ${minutes} min, ${etaLine(summary, now, clock)}, ${formatAgeSex(summary.latest.input.ageYears, summary.latest.input.sex)}${summary.unit ? `, ${summary.unit.callSign}` : ''}`),
    ].join('\n'),
  };
}

/** Whether tier 1 of a level names anyone besides the level's own e-mail list. */
export async function hasTierOneEntries(db: Knex, hospitalId: number, level: string): Promise<boolean> {
  return Boolean(await db('paging_entries').where({ hospital_id: hospitalId, level, tier: 1 }).first('id'));
}
