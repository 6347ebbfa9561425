import dayjs from 'dayjs';
import type { Knex } from 'knex';
import type { Logger } from 'pino';
import type { Me } from '../../../shared/roles';
import { formatAgeSex, formatFallHeight, levelName, type BoardLevel } from '../../../shared/schemas/board';
import { OPEN_STATES, type CaseSummary } from '../../../shared/schemas/cases';
import { surfaceOptions } from '../../../shared/schemas/clinical';
import { PAGED_LEVELS, PagingPlan, type PagedLevel, type PagingContact, type PagingEntry, type PagingStatus, type ReplyAnswer } from '../../../shared/schemas/paging';
import { roomOfHospital } from '../../../shared/realtime/events';
import type { LevelId } from '../../../shared/triage/policy';
import { assertHospital, hospitalIdsOf, roleFor } from '../../auth/guards';
import type { Clock } from '../../deps';
import { forbidden, invalid, notFound } from '../../errors';
import type { Mailer } from '../../mail';
import type { RealtimeServer } from '../../realtime';
import type { SmsSender } from '../../sms';
import { appendAudit, recordCaseEvent, systemActor, type Actor } from '../audit/audit';
import { levelsOfCase } from '../policies/policies';
import { loadCaseRow } from '../cases/queries';
import { caseSummary } from '../cases/summary';
import { composePage, notificationList } from './paging';
import { getSetting, setSetting } from '../people/settings';

// The team's page by SMS as well as e-mail, and what comes back: delivery receipts, replies,
// and re-paging in tiers until somebody answers "on my way". This adds to the hospital's own
// paging system; it does not replace it.

export interface PagingDeps { db: Knex; clock: Clock; mailer: Mailer; sms: SmsSender; logger: Logger; io: RealtimeServer; publicUrl: string }

const PLAN_KEY = 'paging.plan';
/** Defaults a hospital changes in People & places [ours: a starting point, no source]. */
const DEFAULT_TIMING = { minutes: 5, repeats: 1 };
const DEFAULT_TARGET_MINUTES = 10;

type StoredPlan = { levels: Record<PagedLevel, { minutes: number; repeats: number }>; targetMinutes: number };

// ---- Contacts and plans

export async function contactOf(db: Knex, userId: number): Promise<PagingContact> {
  const row = await db('paging_contacts').where({ user_id: userId }).first('email', 'mobile');
  return { email: row?.email ?? null, mobile: row?.mobile ?? null };
}

/** People of the hospital, with their paging contacts, for the admin's settings panel. */
export async function hospitalPeople(db: Knex, hospitalId: number) {
  const rows = await db('users as u').join('memberships as m', 'm.user_id', 'u.id').leftJoin('paging_contacts as p', 'p.user_id', 'u.id')
    .where('m.hospital_id', hospitalId).where('u.active', true).orderBy('u.name').distinct('u.id', 'u.name', 'u.email', 'p.email as paging_email', 'p.mobile');
  return rows.map((r) => ({ id: r.id as number, name: r.name as string, email: r.email as string, contact: { email: (r.paging_email as string) ?? null, mobile: (r.mobile as string) ?? null } }));
}

export async function setContact(db: Knex, me: Me, userId: number, contact: PagingContact, at: number): Promise<PagingContact> {
  const mine = hospitalIdsOf(me);
  const shared = await db('memberships').where({ user_id: userId }).whereIn('hospital_id', mine).first('user_id');
  if (!shared) {
    if (!(await db('users').where({ id: userId }).first('id'))) throw notFound('That person');
    throw forbidden('That person is not in one of your hospitals.');
  }
  await db.transaction(async (trx) => {
    const before = await contactOf(trx, userId);
    await trx('paging_contacts').insert({ user_id: userId, email: contact.email, mobile: contact.mobile, updated_at: at }).onConflict('user_id').merge();
    await appendAudit(trx, { at, actor: { id: me.user.id, role: roleFor(me, 'paging.manage') }, action: 'user.paging-contact-set', entity: 'user', entityId: userId, before, after: contact });
  });
  return contactOf(db, userId);
}

export async function getPagingPlan(db: Knex, hospitalId: number): Promise<PagingPlan> {
  const stored = await getSetting<Partial<StoredPlan> | null>(db, PLAN_KEY, hospitalId, null);
  const entries = await db('paging_entries').where({ hospital_id: hospitalId }).orderBy(['level', 'tier', 'id']).select('level', 'tier', 'kind', 'value');
  const levels = Object.fromEntries(PAGED_LEVELS.map((level) => {
    const timing = stored?.levels?.[level] ?? DEFAULT_TIMING;
    const mine = entries.filter((e) => e.level === level);
    const count = Math.max(1, ...mine.map((e) => Number(e.tier)));
    const tiers: PagingEntry[][] = Array.from({ length: count }, (_, i) => mine.filter((e) => Number(e.tier) === i + 1).map((e) => (e.kind === 'person' ? { kind: 'person', value: Number(e.value) } : { kind: e.kind, value: e.value }) as PagingEntry));
    return [level, { minutes: timing.minutes, repeats: timing.repeats, tiers }];
  })) as PagingPlan['levels'];
  return { levels, targetMinutes: stored?.targetMinutes ?? DEFAULT_TARGET_MINUTES };
}

export async function savePagingPlan(db: Knex, me: Me, hospitalId: number, plan: PagingPlan, at: number): Promise<PagingPlan> {
  assertHospital(me, hospitalId);
  const members = new Set<number>((await db('memberships').where({ hospital_id: hospitalId }).pluck('user_id')).map(Number));
  const issues: Array<{ field: string; message: string }> = [];
  for (const level of PAGED_LEVELS) plan.levels[level].tiers.forEach((tier, t) => tier.forEach((entry, i) => {
    if (entry.kind === 'person' && !members.has(entry.value)) issues.push({ field: `levels.${level}.tiers[${t}][${i}]`, message: 'that person is not a member of this hospital' });
  }));
  if (issues.length) throw invalid(issues);
  const actor: Actor = { id: me.user.id, role: roleFor(me, 'paging.manage') };
  await db.transaction(async (trx) => {
    const before = await getPagingPlan(trx, hospitalId);
    const timing: StoredPlan = { levels: Object.fromEntries(PAGED_LEVELS.map((l) => [l, { minutes: plan.levels[l].minutes, repeats: plan.levels[l].repeats }])) as StoredPlan['levels'], targetMinutes: plan.targetMinutes };
    await setSetting(trx, PLAN_KEY, timing, hospitalId);
    await trx('paging_entries').where({ hospital_id: hospitalId }).delete();
    const seen = new Set<string>();
    const rows = PAGED_LEVELS.flatMap((level) => plan.levels[level].tiers.flatMap((tier, t) => tier.map((e) => ({ hospital_id: hospitalId, level, tier: t + 1, kind: e.kind, value: String(e.kind === 'email' ? e.value.toLowerCase() : e.value) }))))
      .filter((r) => { const key = `${r.level}|${r.tier}|${r.kind}|${r.value}`; if (seen.has(key)) return false; seen.add(key); return true; });
    if (rows.length) await trx('paging_entries').insert(rows);
    await appendAudit(trx, { at, actor, action: 'hospital.paging-plan-set', entity: 'list', entityId: hospitalId, before, after: plan });
  });
  return getPagingPlan(db, hospitalId);
}

// ---- What a page says by SMS

const clockTime = (at: number) => dayjs(at).format('HH:mm');

/** Short, for a lock screen: level, age and sex, mechanism, ETA, bay and case number; never a name. */
export function composeSms(summary: CaseSummary, level: LevelId, levels: readonly BoardLevel[], now: number, round: { tier: number; round: number } = { tier: 1, round: 1 }): string {
  const input = summary.latest.input;
  const surface = surfaceOptions.find((o) => o.id === input.fall.surface);
  const mechanism = `fall ${formatFallHeight(input.fall.heightM, summary.hospital.heightUnit)}${surface && surface.id !== 'unknown' ? ` onto ${surface.label.toLowerCase()}` : ''}`;
  const eta = summary.arrivedAt ? `arrived ${clockTime(summary.arrivedAt)}` : summary.etaAt == null ? 'ETA not given' : `ETA ${clockTime(summary.etaAt)} (${Math.max(0, Math.round((summary.etaAt - now) / 60_000))} min)`;
  const prefix = round.tier > 1 ? `ESCALATED (tier ${round.tier}${round.round > 1 ? `, repeat ${round.round}` : ''}) ` : round.round > 1 ? `REPEAT ${round.round} ` : '';
  return `${prefix}${levelName(levels, level).toUpperCase()} ${summary.hospital.name}: ${formatAgeSex(input.ageYears, input.sex)}, ${mechanism}, ${eta}, ${summary.bay ?? 'bay not yet assigned'}. Case ${summary.caseNumber}. Reply 1 on my way, 2 can't come.`;
}

// ---- Sending a round

interface Target { channel: 'sms' | 'email'; to: string; userId: number | null }

async function userByMobile(db: Knex, mobile: string): Promise<number | null> {
  const row = await db('paging_contacts').where({ mobile }).first('user_id');
  return row?.user_id ?? null;
}

/** Who a tier reaches: people by SMS (or e-mail without a mobile), addresses, numbers; repeats of tier 1 add the level's list. */
async function tierTargets(db: Knex, hospitalId: number, level: string, tier: number, withLevelList: boolean): Promise<Target[]> {
  const entries = await db('paging_entries').where({ hospital_id: hospitalId, level, tier }).orderBy('id').select('kind', 'value');
  const out: Target[] = [];
  if (withLevelList && tier === 1) for (const email of await notificationList(db, hospitalId, level as PagedLevel)) out.push({ channel: 'email', to: email, userId: null });
  for (const e of entries) {
    if (e.kind === 'email') out.push({ channel: 'email', to: e.value, userId: null });
    else if (e.kind === 'sms') out.push({ channel: 'sms', to: e.value, userId: await userByMobile(db, e.value) });
    else {
      const user = await db('users as u').leftJoin('paging_contacts as p', 'p.user_id', 'u.id').where('u.id', Number(e.value)).where('u.active', true).first('u.id', 'u.email', 'p.email as paging_email', 'p.mobile');
      if (!user) continue;
      if (user.mobile) out.push({ channel: 'sms', to: user.mobile, userId: user.id });
      else out.push({ channel: 'email', to: user.paging_email ?? user.email, userId: user.id });
    }
  }
  const seen = new Set<string>();
  return out.filter((t) => (seen.has(`${t.channel}:${t.to}`) ? false : (seen.add(`${t.channel}:${t.to}`), true)));
}

const statusCallbackOf = (deps: PagingDeps) => `${deps.publicUrl}/webhooks/sms/status`;
const errorText = (err: unknown) => String((err as Error)?.message ?? err).slice(0, 300);

/**
 * Pages one tier of a case's level, once: the round is claimed in the database first (so the job
 * and a nurse never both send it), then each SMS goes through the provider and the e-mails by
 * mail, outside the transaction. Returns false when the round was already sent.
 */
export async function sendRound(deps: PagingDeps, caseId: number, tier: number, round: number, opts: { withLevelList: boolean; actor?: Actor }): Promise<boolean> {
  const { db, clock } = deps;
  const row = await loadCaseRow(db, caseId);
  if (row.paged_at == null || !row.decided_level || !(PAGED_LEVELS as readonly string[]).includes(row.decided_level)) return false;
  const level = row.decided_level as PagedLevel;
  const at = clock.now();
  const targets = await tierTargets(db, row.hospital_id, level, tier, opts.withLevelList);
  // Nobody to reach (tier 1 holds only the level's list, already mailed by the nurse's page): no round.
  if (!targets.length) return false;
  const kind = tier === 1 && round === 1 ? 'page-sms-sent' : round > 1 ? 'page-repeated' : 'page-escalated';
  const claimed = await db.transaction(async (trx) => {
    const inserted = await trx('page_rounds').insert({ case_id: caseId, paged_at: row.paged_at, tier, round, at }).onConflict(['case_id', 'paged_at', 'tier', 'round']).ignore().returning('id');
    if (!inserted.length) return false;
    await recordCaseEvent(trx, { caseId, kind, actor: opts.actor ?? systemActor, at, data: { level, tier, round, sms: targets.filter((t) => t.channel === 'sms').map((t) => t.to), email: targets.filter((t) => t.channel === 'email').map((t) => t.to) } });
    return true;
  });
  if (!claimed) return false;
  const summary = await caseSummary(db, caseId);
  const levels = await levelsOfCase(db, row, at);
  const text = composeSms(summary, level, levels, at, { tier, round });
  for (const target of targets.filter((t) => t.channel === 'sms')) {
    const [msg] = await db('outbound_messages').insert({ hospital_id: row.hospital_id, case_id: caseId, channel: 'sms', recipient: target.to, user_id: target.userId, body: text, state: 'queued', tier, round, created_at: at, updated_at: at }).returning('id');
    try {
      const sent = await deps.sms.send(target.to, text, statusCallbackOf(deps));
      await db('outbound_messages').where({ id: msg.id }).update({ provider_id: sent.sid, updated_at: clock.now() });
    } catch (err) {
      deps.logger.warn({ err, caseId }, 'an SMS page could not be sent');
      await markFailed(deps, msg.id, errorText(err));
    }
  }
  const emails = targets.filter((t) => t.channel === 'email').map((t) => t.to);
  if (emails.length) {
    const mail = composePage(summary, level, levels, at);
    const label = tier > 1 ? `Escalated (tier ${tier}): ` : round > 1 ? `Repeat ${round}: ` : '';
    try {
      await deps.mailer.send({ ...mail, subject: label + mail.subject, to: emails, hospitalId: row.hospital_id, record: { caseId, tier, round } });
    } catch (err) {
      deps.logger.error({ err, caseId }, 'a page e-mail could not be sent');
      await db.transaction((trx) => recordCaseEvent(trx, { caseId, kind: 'page-mail-failed', actor: systemActor, at: clock.now(), data: { tier, round, recipients: emails, error: errorText(err) } }));
    }
  }
  await announcePaging(deps, row.hospital_id, caseId);
  return true;
}

/** After a nurse's page: tier 1's own entries (people, numbers, addresses) on top of the level's e-mail list. */
export async function startPaging(deps: PagingDeps, caseId: number, actor: Actor): Promise<void> {
  try {
    await sendRound(deps, caseId, 1, 1, { withLevelList: false, actor });
  } catch (err) {
    deps.logger.error({ err, caseId }, 'paging by SMS failed');
  }
}

// ---- Receipts and fallback

const STATE_RANK: Record<string, number> = { queued: 0, accepted: 0, sending: 0, sent: 1, delivered: 2, undelivered: 3, failed: 3 };
const isFailure = (state: string) => state === 'failed' || state === 'undelivered';

/** A failed SMS: the state, its audit row, and the same page by e-mail to the person when they have an address. */
async function markFailed(deps: PagingDeps, messageId: number, error: string): Promise<void> {
  const { db, clock } = deps;
  const msg = await db('outbound_messages').where({ id: messageId }).first();
  const at = clock.now();
  await db.transaction(async (trx) => {
    await trx('outbound_messages').where({ id: messageId }).update({ state: 'failed', error, updated_at: at });
    if (msg.case_id) await recordCaseEvent(trx, { caseId: msg.case_id, kind: 'page-receipt', actor: systemActor, at, data: { messageId, to: msg.recipient, state: 'failed', error } });
  });
  await fallBack(deps, messageId);
}

async function fallBack(deps: PagingDeps, messageId: number): Promise<void> {
  const { db } = deps;
  const msg = await db('outbound_messages').where({ id: messageId }).first();
  if (!msg?.case_id || (await db('outbound_messages').where({ fallback_of: messageId }).first('id'))) return;
  const userId = msg.user_id ?? (await userByMobile(db, msg.recipient));
  const user = userId ? await db('users as u').leftJoin('paging_contacts as p', 'p.user_id', 'u.id').where('u.id', userId).first('u.email', 'p.email as paging_email') : null;
  const address = user ? user.paging_email ?? user.email : null;
  if (address) {
    const row = await loadCaseRow(db, msg.case_id);
    const summary = await caseSummary(db, msg.case_id);
    const mail = composePage(summary, row.decided_level ?? summary.recommendedLevel, await levelsOfCase(db, row, deps.clock.now()), deps.clock.now());
    try {
      await deps.mailer.send({ ...mail, subject: `SMS not delivered, by e-mail instead: ${mail.subject}`, to: [address], hospitalId: msg.hospital_id, record: { caseId: msg.case_id, userId, tier: msg.tier, round: msg.round, fallbackOf: messageId } });
    } catch (err) {
      deps.logger.error({ err, messageId }, 'the e-mail in place of a failed SMS could not be sent');
    }
  }
}

/** A delivery receipt from the provider's status callback. Unknown messages are ignored. */
export async function recordReceipt(deps: PagingDeps, params: Record<string, string>): Promise<boolean> {
  const { db, clock } = deps;
  const state = String(params.MessageStatus ?? params.SmsStatus ?? '');
  const msg = params.MessageSid ? await db('outbound_messages').where({ provider_id: params.MessageSid, channel: 'sms' }).first() : null;
  if (!msg || !(state in STATE_RANK)) return false;
  if (STATE_RANK[state] <= STATE_RANK[msg.state]) return true;
  const at = clock.now();
  const error = params.ErrorCode ? `provider error ${params.ErrorCode}` : null;
  await db.transaction(async (trx) => {
    await trx('outbound_messages').where({ id: msg.id }).update({ state, error, updated_at: at });
    if (msg.case_id) await recordCaseEvent(trx, { caseId: msg.case_id, kind: 'page-receipt', actor: systemActor, at, data: { messageId: msg.id, to: msg.recipient, state, errorCode: params.ErrorCode ?? null } });
  });
  if (isFailure(state)) await fallBack(deps, msg.id);
  if (msg.case_id) await announcePaging(deps, msg.hospital_id, msg.case_id);
  return true;
}

// ---- Replies

export function answerOf(body: string): ReplyAnswer {
  const text = body.trim();
  if (/^1(\b|$)/.test(text)) return 'coming';
  if (/^2(\b|$)/.test(text)) return 'declined';
  return 'text';
}

/** A reply from a paged phone: to the newest open case that number was paged for. */
export async function recordReply(deps: PagingDeps, params: Record<string, string>): Promise<{ caseId: number; answer: ReplyAnswer } | null> {
  const { db, clock } = deps;
  const from = String(params.From ?? '');
  const body = String(params.Body ?? '').slice(0, 1600);
  const sid = String(params.MessageSid ?? '');
  if (!from || !sid) return null;
  const msg = await db('outbound_messages as m').join('cases as c', 'c.id', 'm.case_id').where({ 'm.channel': 'sms', 'm.recipient': from }).whereIn('c.state', OPEN_STATES as string[])
    .orderBy('m.id', 'desc').first('m.id', 'm.case_id', 'm.hospital_id', 'm.user_id');
  if (!msg) return null;
  const answer = answerOf(body);
  const userId = msg.user_id ?? (await userByMobile(db, from));
  const at = clock.now();
  const fresh = await db.transaction(async (trx) => {
    const inserted = await trx('page_replies').insert({ case_id: msg.case_id, message_id: msg.id, from_number: from, user_id: userId, answer, body, provider_id: sid, at }).onConflict('provider_id').ignore().returning('id');
    if (!inserted.length) return false;
    const name = userId ? (await trx('users').where({ id: userId }).first('name'))?.name : null;
    await recordCaseEvent(trx, { caseId: msg.case_id, kind: 'page-reply', actor: { id: userId, role: 'paged' }, at, data: { from, name: name ?? null, answer, text: body } });
    return true;
  });
  if (fresh) await announcePaging(deps, msg.hospital_id, msg.case_id);
  return { caseId: msg.case_id, answer };
}

// ---- What the board shows

export async function pagingStatus(db: Knex, caseId: number): Promise<PagingStatus> {
  const replies = await db('page_replies as r').leftJoin('users as u', 'u.id', 'r.user_id').where('r.case_id', caseId).orderBy('r.id').select('r.id', 'r.from_number', 'u.name', 'r.answer', 'r.body', 'r.at');
  const failures = await db('outbound_messages as m').leftJoin('users as u', 'u.id', 'm.user_id').leftJoin('outbound_messages as f', 'f.fallback_of', 'm.id')
    .where({ 'm.case_id': caseId, 'm.channel': 'sms' }).whereIn('m.state', ['failed', 'undelivered']).orderBy('m.id').select('m.id', 'm.recipient', 'u.name', 'm.updated_at', 'f.recipient as fallback');
  const last = await db('page_rounds').where({ case_id: caseId }).orderBy('id', 'desc').first('tier', 'round');
  return {
    caseId,
    replies: replies.map((r) => ({ id: r.id, name: r.name ?? r.from_number, answer: r.answer, text: r.body, at: Number(r.at) })),
    failures: failures.map((f) => ({ id: f.id, recipient: f.recipient, name: f.name ?? null, at: Number(f.updated_at), fellBackTo: f.fallback ?? null })),
    tier: last?.tier ?? 1,
    round: last?.round ?? 1,
  };
}

/** Every open, paged case of a hospital that has something to show. */
export async function boardPaging(db: Knex, me: Me, hospitalId: number): Promise<PagingStatus[]> {
  assertHospital(me, hospitalId);
  const ids: number[] = await db('cases').where({ hospital_id: hospitalId }).whereIn('state', OPEN_STATES as string[]).whereNotNull('paged_at').pluck('id');
  return Promise.all(ids.map((id) => pagingStatus(db, id)));
}

async function announcePaging(deps: Pick<PagingDeps, 'db' | 'io'>, hospitalId: number, caseId: number): Promise<void> {
  deps.io.to(roomOfHospital(hospitalId)).emit('paging:changed', await pagingStatus(deps.db, caseId));
}

// ---- The review's interval

/** Minutes from each page to its first "on my way", for the cases a review covers. */
export async function pageToFirstComing(db: Knex, hospitalIds: number[], range: { from: number; to: number }) {
  const rows = await db('cases as c').join('hospitals as h', 'h.id', 'c.hospital_id').whereIn('c.hospital_id', hospitalIds).whereNotNull('c.paged_at')
    .whereBetween('c.paged_at', [range.from, range.to]).orderBy('c.paged_at')
    .select('c.id', 'c.case_number', 'c.hospital_id', 'h.name as hospital', 'c.paged_at')
    .select(db.raw("(SELECT MIN(r.at) FROM page_replies r WHERE r.case_id = c.id AND r.answer = 'coming' AND r.at >= c.paged_at) AS first_coming"));
  const targets = new Map<number, number>();
  for (const id of new Set(rows.map((r) => r.hospital_id as number))) targets.set(id, (await getPagingPlan(db, id)).targetMinutes);
  return rows.map((r) => {
    const minutes = r.first_coming == null ? null : Math.round((Number(r.first_coming) - Number(r.paged_at)) / 6_000) / 10;
    const target = targets.get(r.hospital_id)!;
    return { caseId: r.id as number, caseNumber: r.case_number as string, hospital: r.hospital as string, pagedAt: Number(r.paged_at), minutes, targetMinutes: target, met: minutes != null && minutes <= target };
  });
}
