import dayjs from 'dayjs';
import type { Knex } from 'knex';
import type { Me } from '../../../shared/roles';
import {
  ACTION_EVENT,
  BOARD_ACTION_SCHEMAS,
  FUTURE_TOLERANCE_MS,
  REASON_MIN,
  levelName,
  type BoardAction,
  type BoardActionBody,
  type BoardSnapshot,
  BOARD_CURSOR,
} from '../../../shared/schemas/board';
import { OPEN_STATES, type CaseSummary } from '../../../shared/schemas/cases';
import { eventPhrase, type CaseEventDataOf, type CaseEventKind } from '../../../shared/schemas/case-events';
import type { CaseChange } from '../../../shared/realtime/events';
import { LEVEL_RANK } from '../../../shared/triage/policy';
import { assertHospital, hospitalIdsOf } from '../../auth/guards';
import type { Clock } from '../../deps';
import { AppError, CaseRefusal, conflict, forbidden, invalid, parseOr400 } from '../../errors';
import type { Mailer } from '../../mail';
import { GENESIS_HASH, newestAuditRow, recordCaseEvent, type Actor } from '../audit/audit';
import type { CaseActor } from '../cases/commands';
import { loadCaseRow } from '../cases/queries';
import { caseSummary, listCaseSummariesJson, listCaseSummariesPage } from '../cases/summary';
import { casesInBay } from './bays';
import { composePage, hasTierOneEntries, hospitalClock, notificationList } from './paging';
import { levelsOfCase, policyInForce } from '../policies/policies';
import { getSetting } from '../people/settings';

type CaseRow = Awaited<ReturnType<typeof loadCaseRow>>;


export interface BoardOutcome { summary: CaseSummary; change: CaseChange }

const actorOf = (a: CaseActor): Actor => ({ id: a.me.user.id, role: a.role });
const clockTime = (at: number) => dayjs(at).format('HH:mm');

/** A reload that would carry more changed cases than this gets the whole list instead. */
const MOST_CHANGES = 500;
const GENESIS_CURSOR = `0-${GENESIS_HASH.slice(0, 16)}`;

/** The newest audit row: every change to a case writes one, in the same transaction, in commit order. */
async function changeCursor(db: Knex): Promise<string> {
  const last = await newestAuditRow(db);
  return last ? `${last.id}-${last.hash.slice(0, 16)}` : GENESIS_CURSOR;
}

/**
 * The audit row id a cursor stands at, or null when the cursor cannot say what changed since: its
 * row is gone or holds another hash (the database was restored from a backup since).
 */
async function cursorRow(db: Knex, cursor: string): Promise<number | null> {
  const match = BOARD_CURSOR.exec(cursor);
  if (!match) return null;
  const after = Number(match[1]);
  if (after === 0) return cursor === GENESIS_CURSOR ? 0 : null;
  const row = await db('audit_log').where({ id: after }).first('hash');
  return row && String(row.hash).startsWith(match[2]) ? after : null;
}

/** The cases changed after an audit row, or null when more changed than one reload should carry. */
async function casesChangedAfter(db: Knex, after: number): Promise<number[] | null> {
  const rows = (await db('audit_log').where('id', '>', after).whereNotNull('case_id').distinct('case_id').limit(MOST_CHANGES + 1)) as Array<{ case_id: number }>;
  return rows.length > MOST_CHANGES ? null : rows.map((r) => r.case_id);
}

/**
 * The hospital a board shows (the one asked for if it is the person's, else their first), as the
 * JSON text of a BoardSnapshot: its cases are joined from the kept summary texts. Given the cursor
 * of the board's last snapshot, it holds only the open cases changed since, with the ids of all the
 * open ones; when the cursor cannot say what changed, the whole list, as without one.
 */
export async function boardSnapshotJson(db: Knex, clock: Clock, me: Me, hospitalId?: number, changesSince?: string): Promise<string> {
  const mine = hospitalIdsOf(me);
  const id = hospitalId ?? mine[0];
  if (id === undefined) throw forbidden('You are not a member of any hospital.');
  assertHospital(me, id);
  const at = clock.now();
  const hospital = await db('hospitals').where({ id }).first('id', 'name', 'height_unit', 'escalation_minutes');
  const policy = await policyInForce(db, id, at);
  const responseTargetMinutes = await getSetting<number>(db, 'response.targetMinutes', id);
  const head = {
    hospital: { id: hospital.id, name: hospital.name, heightUnit: hospital.height_unit, escalationMinutes: hospital.escalation_minutes, responseTargetMinutes },
    levels: policy.levels.map((l) => ({ id: l.id, name: l.name })),
  } satisfies Omit<BoardSnapshot, 'cases' | 'at' | 'cursor'>;
  // The cursor is read first: whatever commits after it is in the next reload's changes.
  const cursor = await changeCursor(db);
  const start = `{"hospital":${JSON.stringify(head.hospital)},"levels":${JSON.stringify(head.levels)},"at":${at},"cursor":"${cursor}"`;
  const after = changesSince === undefined ? null : await cursorRow(db, changesSince);
  if (after !== null) {
    // The open ids before the changes: a case made in between is then among the changes (and
    // shown) rather than only among the ids, which would send the board back for the whole list.
    const openIds = (await db('cases').where({ hospital_id: id }).whereIn('state', OPEN_STATES).orderBy('id').limit(MOST_CHANGES + 1).pluck('id')) as number[];
    const changed = await casesChangedAfter(db, after);
    // More open than one list carries: the whole list, cut by urgency and saying what it left out.
    if (changed && openIds.length <= MOST_CHANGES) {
      const cases = changed.length ? await listCaseSummariesJson(db, { ids: changed, hospitalIds: [id], states: OPEN_STATES, now: at }) : '[]';
      return `${start},"changesSince":"${changesSince}","openIds":${JSON.stringify(openIds)},"openTotal":${openIds.length},"cases":${cases}}`;
    }
  }
  const page = await listCaseSummariesPage(db, { hospitalIds: [id], states: OPEN_STATES, now: at });
  return `${start},"openTotal":${page.total},"cases":${page.json}}`;
}

/** "Already acknowledged by Morgan at 03:12" for the race the product is built around; otherwise who changed it last. */
async function staleMessage(db: Knex, row: CaseRow, action: BoardAction): Promise<string> {
  if (action === 'acknowledge' && row.acknowledged_at != null && !row.level_rose) {
    const who = await db('users').where({ id: row.acknowledged_by }).first('name');
    return `Already acknowledged by ${who?.name ?? 'someone'} at ${clockTime(Number(row.acknowledged_at))}.`;
  }
  const last = await db('case_events as e').leftJoin('users as u', 'u.id', 'e.actor_id').where('e.case_id', row.id).orderBy('e.id', 'desc').first('e.kind', 'e.at', 'e.actor_role', 'u.name');
  const what = last ? `${eventPhrase(last.kind)} by ${last.name ?? (last.actor_role === 'system' ? 'Plumbline' : 'someone')} at ${clockTime(Number(last.at))}` : 'changed';
  return `The case changed first (${what}). Your board now shows it as it stands; look again before acting.`;
}

/** An action refused after the case was read: the answer carries the case as it stands, so the loser's board catches up. */
async function refuse(db: Knex, caseId: number, status: number, code: string, message: string): Promise<never> {
  throw new CaseRefusal(status, code, message, await caseSummary(db, caseId));
}

/** The change an action makes, and what its case event records. */
interface Plan<K extends CaseEventKind> {
  update: Record<string, unknown>;
  data: CaseEventDataOf[K];
  before?: Record<string, unknown>;
}

type ActionPlan<A extends BoardAction> = Plan<(typeof ACTION_EVENT)[A]>;
type Planner<A extends BoardAction> = (row: CaseRow, body: BoardActionBody[A], ctx: { at: number; db: Knex; actor: CaseActor }) => Promise<ActionPlan<A>> | ActionPlan<A>;

function recordedTime(at: number | undefined, now: number, earliest: number, earliestWhat: string): number {
  const when = at ?? now;
  if (when > now + FUTURE_TOLERANCE_MS) throw invalid([{ field: 'at', message: 'cannot be in the future' }]);
  if (when < earliest) throw invalid([{ field: 'at', message: `cannot be before ${earliestWhat} (${clockTime(earliest)})` }]);
  return when;
}

const needsAcknowledged = (row: CaseRow) => {
  if (row.acknowledged_at == null) throw conflict('Acknowledge the case first.');
};

const planners: { [A in Exclude<BoardAction, 'page'>]: Planner<A> } = {
  async acknowledge(row, _body, { at, db, actor }) {
    if (row.acknowledged_at != null && !row.level_rose) throw conflict(await staleMessage(db, row, 'acknowledge'));
    return {
      update: {
        state: row.state === 'en-route' ? 'acknowledged' : row.state,
        acknowledged_at: row.acknowledged_at ?? at,
        acknowledged_by: row.acknowledged_by ?? actor.me.user.id,
        level_rose: false,
      },
      data: { recommended: row.recommended_level, revision: row.current_revision, levelRose: Boolean(row.level_rose), first: row.acknowledged_at == null },
      before: { state: row.state },
    };
  },

  async decide(row, body, { at, db, actor }) {
    needsAcknowledged(row);
    const below = LEVEL_RANK[body.level] < LEVEL_RANK[row.recommended_level];
    const reason = body.reason?.trim() || null;
    if (below && (reason ?? '').length < REASON_MIN) {
      const levels = await levelsOfCase(db, row, at);
      throw invalid([{ field: 'reason', message: `is required to decide ${levelName(levels, body.level)}, below the recommended ${levelName(levels, row.recommended_level)}: say why in a few words` }]);
    }
    return {
      update: { decided_level: body.level, decided_reason: reason, decided_by: actor.me.user.id, decided_at: at },
      data: { level: body.level, recommended: row.recommended_level, below, reason, revision: row.current_revision },
      before: { level: row.decided_level, reason: row.decided_reason },
    };
  },

  async bay(row, body, { db }) {
    needsAcknowledged(row);
    // Two patients in one bay is a mistake unless the nurse means it: warn, and ask again.
    const others = await casesInBay(db, row.hospital_id, body.bay, row.id);
    if (others.length && !body.confirmOccupied) {
      throw new AppError(409, 'bay_occupied', `${body.bay} is already assigned to case ${others.map((o) => o.case_number).join(', ')}. Assign it anyway only if both patients really share it.`);
    }
    return { update: { bay: body.bay }, data: { bay: body.bay, sharedWith: others.map((o) => o.id) }, before: { bay: row.bay } };
  },

  arrived(row, body, { at }) {
    if (row.arrived_at != null) throw conflict(`Already marked arrived at ${clockTime(Number(row.arrived_at))}.`);
    const when = recordedTime(body.at, at, Number(row.created_at), 'the pre-alert was received');
    return { update: { state: 'arrived', arrived_at: when }, data: { at: when, etaAt: row.eta_at == null ? null : Number(row.eta_at) }, before: { state: row.state } };
  },

  'team-at-bedside'(row, body, { at }) {
    if (row.arrived_at == null) throw conflict('Mark the patient arrived first.');
    const arrived = Number(row.arrived_at);
    const when = recordedTime(body.at, at, arrived, 'the patient arrived');
    return {
      update: { team_at_bedside_at: when },
      data: { at: when, minutesFromArrival: Math.round(((when - arrived) / 60_000) * 10) / 10 },
      before: { at: row.team_at_bedside_at == null ? null : Number(row.team_at_bedside_at) },
    };
  },

  close(row, body, { at }) {
    const reason = body.reason?.trim() || null;
    if (row.arrived_at == null && (reason ?? '').length < REASON_MIN) {
      throw invalid([{ field: 'reason', message: 'is required to close a case whose patient has not arrived: say why in a few words' }]);
    }
    return { update: { state: 'closed', closed_at: at }, data: { reason, arrived: row.arrived_at != null }, before: { state: row.state } };
  },
};

/** Reads the case, checks it is this nurse's hospital's and still the version they saw. */
async function openCase(db: Knex, actor: CaseActor, caseId: number, action: BoardAction, raw: unknown): Promise<{ row: CaseRow; body: BoardActionBody[BoardAction] }> {
  const row = await loadCaseRow(db, caseId);
  assertHospital(actor.me, row.hospital_id);
  const body = parseOr400(BOARD_ACTION_SCHEMAS[action], raw) as BoardActionBody[BoardAction];
  if (row.row_version !== body.rowVersion) await refuse(db, row.id, 409, 'conflict', await staleMessage(db, row, action));
  if (!OPEN_STATES.includes(row.state)) await refuse(db, row.id, 409, 'conflict', `Case ${row.case_number} is ${row.state}; it is no longer on the board.`);
  return { row, body };
}

/** Writes the change only if nobody changed the case since it was read: the first of two nurses wins. */
async function commit<K extends CaseEventKind>(db: Knex, actor: CaseActor, row: CaseRow, action: BoardAction, at: number, kind: K, plan: Plan<K>): Promise<void> {
  const won = await db.transaction(async (trx) => {
    const changed = await trx('cases').where({ id: row.id, row_version: row.row_version }).update({ ...plan.update, updated_at: at, row_version: row.row_version + 1 });
    if (!changed) return false;
    await recordCaseEvent(trx, { caseId: row.id, kind, actor: actorOf(actor), at, data: plan.data, before: plan.before, policy: { id: row.policy_id, version: row.policy_version } });
    return true;
  });
  if (!won) {
    const now = await loadCaseRow(db, row.id);
    await refuse(db, row.id, 409, 'conflict', await staleMessage(db, now, action));
  }
}

export interface BoardDeps { db: Knex; clock: Clock; mailer: Mailer }

/**
 * One charge-nurse action on a case: checked (hospital, version, state, the reason rule),
 * written with its audit event in one transaction, and returned with the change to announce.
 */
export async function actOnCase(deps: BoardDeps, actor: CaseActor, caseId: number, action: BoardAction, raw: unknown): Promise<BoardOutcome> {
  const { db, clock } = deps;
  const { row, body } = await openCase(db, actor, caseId, action, raw);
  const at = clock.now();
  if (action === 'page') return pageTeam(deps, actor, row, at);
  const planner = planners[action] as Planner<typeof action>;
  let plan: ActionPlan<typeof action>;
  try {
    plan = await planner(row, body, { at, db, actor });
  } catch (err) {
    // A state rule (409) still tells the board how the case stands; a 400 leaves it alone.
    if (err instanceof AppError && err.status === 409 && !(err instanceof CaseRefusal)) await refuse(db, row.id, 409, err.code, err.message);
    throw err;
  }
  await commit(db, actor, row, action, at, ACTION_EVENT[action], plan);
  return { summary: await caseSummary(db, row.id), change: { kind: ACTION_EVENT[action], at, by: actor.me.user.name } };
}

/**
 * Pages the decided level's list. The page is claimed in the database first (so two nurses
 * never both send it), then mailed outside the transaction (SQLite has one connection, and an
 * SMTP round trip must not hold it); if the mail fails the claim is undone and audited.
 */
async function pageTeam(deps: BoardDeps, actor: CaseActor, row: CaseRow, at: number): Promise<BoardOutcome> {
  const { db, mailer } = deps;
  const level = row.decided_level;
  const levels = await levelsOfCase(db, row, at);
  if (row.acknowledged_at == null) await refuse(db, row.id, 409, 'conflict', 'Acknowledge the case first.');
  if (!level) return refuse(db, row.id, 409, 'conflict', 'Decide the level before paging the team.');
  if (level === 'none') return refuse(db, row.id, 409, 'conflict', `${levelName(levels, 'none')} was decided, so there is no team to page.`);
  const recipients = await notificationList(db, row.hospital_id, level);
  if (!recipients.length && !(await hasTierOneEntries(db, row.hospital_id, level))) await refuse(db, row.id, 409, 'no_recipients', `The ${levelName(levels, level)} list has no addresses. An administrator adds them in People & places.`);

  const before = await caseSummary(db, row.id);
  const mail = composePage(before, level, levels, at, await hospitalClock(db, row.hospital_id));
  await commit(db, actor, row, 'page', at, 'paged', {
    update: { paged_at: at },
    data: { level, list: level, recipients, subject: mail.subject, bay: row.bay, etaAt: row.eta_at == null ? null : Number(row.eta_at) },
    before: { pagedAt: row.paged_at == null ? null : Number(row.paged_at) },
  });
  try {
    if (recipients.length) await mailer.send({ ...mail, to: recipients, hospitalId: row.hospital_id, record: { caseId: row.id, tier: 1, round: 1 } });
  } catch (err) {
    const claimed = await loadCaseRow(db, row.id);
    await db.transaction(async (trx) => {
      await trx('cases').where({ id: row.id }).update({ paged_at: row.paged_at, updated_at: at, row_version: claimed.row_version + 1 });
      await recordCaseEvent(trx, { caseId: row.id, kind: 'page-failed', actor: actorOf(actor), at, data: { level, recipients, error: String((err as Error)?.message ?? err).slice(0, 300) } });
    });
    await refuse(db, row.id, 502, 'page_failed', 'The page e-mail could not be sent, so nobody was paged. Try again, or phone the team.');
  }
  return { summary: await caseSummary(db, row.id), change: { kind: 'paged', at, by: actor.me.user.name } };
}
