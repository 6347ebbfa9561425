import type { Knex } from 'knex';
import type { Me, Role } from '../../../shared/roles';
import { OPEN_STATES, type CaseCancel, type CaseEventView, type CaseRedirect, type CaseState, type CaseSummary, type PreAlert, type PreAlertUpdate } from '../../../shared/schemas/cases';
import type { ClinicalInput } from '../../../shared/schemas/clinical';
import { applyClinicalChanges, MergedClinical } from '../../../shared/schemas/clinical-changes';
import { evaluate, type Evaluation, type FieldRisk } from '../../../shared/triage/evaluate';
import { LEVEL_RANK, type LevelId } from '../../../shared/triage/policy';
import { compareUrgency, type UrgencyFacts } from '../../../shared/board/urgency';
import { agencyIdsOf, hospitalIdsOf } from '../../auth/guards';
import type { Clock } from '../../deps';
import { conflict, forbidden, invalid, notFound, parseOr400 } from '../../errors';
import { recordCaseEvent, type Actor } from '../audit/audit';
import { policyInForce } from '../policies/policies';
import { storeEvaluationInput } from './evaluation-input';

/** Who changes a case: a person in a role, or a registered machine client, named by `source`. */
export interface CaseActor { me: Me; role: Role | 'machine_client'; source?: string }
const actorOf = (a: CaseActor): Actor => ({ id: a.me.user.id, role: a.role });

interface CaseRow {
  id: number; case_number: string; client_id: string; agency_id: number; unit_id: number | null; hospital_id: number;
  created_by: number; state: CaseState; current_revision: number; eta_at: number | null; field_risk: FieldRisk;
  recommended_level: LevelId; level_rose: number | boolean; decided_level: LevelId | null; decided_reason: string | null;
  decided_by: number | null; decided_at: number | null; acknowledged_by: number | null; acknowledged_at: number | null;
  bay: string | null; paged_at: number | null; arrived_at: number | null; team_at_bedside_at: number | null;
  closed_at: number | null; cancelled_at: number | null; cancel_reason: string | null; overdue_at: number | null;
  policy_id: string; policy_version: number; created_at: number; updated_at: number; row_version: number;
  source: string | null;
}

const num = (v: unknown) => (v == null ? null : Number(v));

export const caseNumberOf = (id: number, createdAt: number) => `P${String(new Date(createdAt).getUTCFullYear()).slice(2)}-${String(id).padStart(5, '0')}`;

/** Who may read a case: the destination hospital's people and the sending agency's people. */
export function canRead(me: Me, row: Pick<CaseRow, 'hospital_id' | 'agency_id'>): boolean {
  return hospitalIdsOf(me).includes(row.hospital_id) || agencyIdsOf(me).includes(row.agency_id);
}

export async function loadCaseRow(db: Knex, caseId: number): Promise<CaseRow> {
  const row = await db<CaseRow>('cases').where({ id: caseId }).first();
  if (!row) throw notFound('That case');
  return row;
}

/** The case, if this person may read it: 404 when there is none, 403 when it is another's. */
export async function caseForReader(db: Knex, me: Me, caseId: number): Promise<CaseRow> {
  const row = await loadCaseRow(db, caseId);
  if (!canRead(me, row)) throw forbidden('That case belongs to another hospital or agency.');
  return row;
}

/** The case, if it is this paramedic's agency's and still open. */
async function caseForCrew(db: Knex, me: Me, caseId: number): Promise<CaseRow> {
  const row = await loadCaseRow(db, caseId);
  if (!agencyIdsOf(me).includes(row.agency_id)) throw forbidden('That case belongs to another ambulance agency.');
  if (row.state === 'closed' || row.state === 'cancelled') throw conflict(`Case ${row.case_number} is ${row.state}; it can no longer be changed.`);
  return row;
}

async function agencyForDestination(db: Knex, me: Me, hospitalId: number, unitId: number | null | undefined): Promise<{ agencyId: number }> {
  const agencies = agencyIdsOf(me);
  if (!agencies.length) throw forbidden('You are not a member of any ambulance agency.');
  const served = await db('agency_hospitals').whereIn('agency_id', agencies).andWhere({ hospital_id: hospitalId }).select('agency_id');
  if (!served.length) throw invalid([{ field: 'hospitalId', message: 'is not a destination of your agency' }]);
  const candidates = served.map((row) => row.agency_id as number);
  if (unitId != null) {
    const unit = await db('units').where({ id: unitId }).first('agency_id', 'active');
    if (!unit || !candidates.includes(unit.agency_id) || !unit.active) throw invalid([{ field: 'unitId', message: 'is not an active unit of your agency' }]);
    return { agencyId: unit.agency_id };
  }
  return { agencyId: candidates[0] };
}

async function evaluateFor(db: Knex, hospitalId: number, clinical: ClinicalInput, at: number): Promise<Evaluation> {
  return evaluate(clinical, { policy: await policyInForce(db, hospitalId, at) });
}

const isUniqueViolation = (err: unknown) => /UNIQUE constraint failed|duplicate key value/i.test(String((err as Error)?.message));

/**
 * Stores a new pre-alert and its first revision, evaluated under the destination's policy in
 * force. The same clientId again returns the case already made: a retry never makes a second.
 * The checks and the policy are read inside the same transaction as the writes: one connection
 * taken for the whole pre-alert instead of one per read, and a case that is stored was checked
 * against the destinations and the policy as they stood when it was stored.
 */
export async function submitPreAlert(db: Knex, clock: Clock, actor: CaseActor, payload: PreAlert): Promise<{ caseId: number; created: boolean }> {
  try {
    let written: WrittenRevision | undefined;
    const stored = await db.transaction(async (trx) => {
      const existing = await trx('cases').where({ client_id: payload.clientId }).first('id', 'agency_id');
      if (existing) {
        if (!agencyIdsOf(actor.me).includes(existing.agency_id)) throw conflict('That pre-alert id is already in use.');
        return { caseId: existing.id as number, created: false };
      }
      const { agencyId } = await agencyForDestination(trx, actor.me, payload.hospitalId, payload.unitId);
      const at = clock.now();
      const result = await evaluateFor(trx, payload.hospitalId, payload.clinical, at);
      const [inserted] = await trx('cases')
        .insert({
          case_number: payload.clientId,
          client_id: payload.clientId,
          agency_id: agencyId,
          unit_id: payload.unitId ?? null,
          hospital_id: payload.hospitalId,
          created_by: actor.me.user.id,
          state: 'en-route',
          current_revision: 1,
          eta_at: payload.etaMinutes == null ? null : at + payload.etaMinutes * 60_000,
          field_risk: result.fieldRisk,
          recommended_level: result.activation,
          level_rose: false,
          policy_id: result.policy.id,
          policy_version: result.policy.version,
          source: actor.source ?? null,
          created_at: at,
          updated_at: at,
        })
        .returning('id');
      const id = inserted.id as number;
      await trx('cases').where({ id }).update({ case_number: caseNumberOf(id, at) });
      written = await insertRevision(trx, id, 1, payload.clinical, result, payload.etaMinutes ?? null, payload.notes ?? null, actor.me.user.id, at);
      await recordCaseEvent(trx, {
        caseId: id,
        kind: 'received',
        actor: actorOf(actor),
        at,
        data: { revision: 1, fieldRisk: result.fieldRisk, activation: result.activation, criteria: result.criteria.map((c) => c.id), hospitalId: payload.hospitalId, etaMinutes: payload.etaMinutes ?? null },
        policy: result.policy,
      });
      return { caseId: id, created: true };
    });
    if (written) rememberWritten(db, written);
    return stored;
  } catch (err) {
    // Two sends of the same pre-alert raced; the first one made the case.
    if (isUniqueViolation(err)) {
      const raced = await db('cases').where({ client_id: payload.clientId }).first('id', 'agency_id');
      if (raced && !agencyIdsOf(actor.me).includes(raced.agency_id)) throw conflict('That pre-alert id is already in use.');
      if (raced) return { caseId: raced.id, created: false };
    }
    throw err;
  }
}

/** Writes a revision; returns its JSON as stored, for the cache once the transaction commits. */
async function insertRevision(db: Knex, caseId: number, revision: number, input: ClinicalInput, result: Evaluation, etaMinutes: number | null, notes: string | null, userId: number, at: number): Promise<WrittenRevision> {
  const written = { caseId, revision, input: JSON.stringify(input), result: JSON.stringify(result) };
  await db('case_revisions').insert({
    case_id: caseId,
    revision,
    input: written.input,
    result: written.result,
    criteria_set: result.set,
    policy_id: result.policy.id,
    policy_version: result.policy.version,
    field_risk: result.fieldRisk,
    activation: result.activation,
    eta_minutes: etaMinutes,
    notes,
    created_by: userId,
    created_at: at,
  });
  await storeEvaluationInput(db, caseId, revision, result.set, input);
  return written;
}

interface WrittenRevision { caseId: number; revision: number; input: string; result: string }

/** After the commit: the summary announced next finds the revision parsed exactly as it will read back. */
function rememberWritten(db: Knex, written: WrittenRevision): void {
  rememberRevision(revisionCacheOf(db), revisionKey(written.caseId, written.revision), { input: JSON.parse(written.input) as ClinicalInput, result: JSON.parse(written.result) as Evaluation });
}

/** An update en route: a new revision, evaluated again; a rising recommendation is flagged. */
export async function reviseCase(db: Knex, clock: Clock, actor: CaseActor, payload: PreAlertUpdate): Promise<{ caseId: number; rose: boolean; from: LevelId; to: LevelId }> {
  const row = await caseForCrew(db, actor.me, payload.caseId);
  const latest = await db('case_revisions').where({ case_id: row.id, revision: row.current_revision }).first('input', 'eta_minutes', 'notes');
  // Changes are laid over the report this row_version stored; a newer revision in between makes
  // the guarded write below refuse, so nothing is merged onto a report the crew has not seen.
  const input = payload.changes !== undefined
    ? parseOr400(MergedClinical, { changes: applyClinicalChanges(JSON.parse(latest.input) as ClinicalInput, payload.changes) }).changes
    : payload.clinical!;
  // Notes the update leaves out stay as the last revision had them (the case keeps its ETA too).
  const notes = payload.notes === undefined ? latest.notes : payload.notes;
  const at = clock.now();
  const result = await evaluateFor(db, row.hospital_id, input, at);
  const from = row.recommended_level;
  const rose = LEVEL_RANK[result.activation] > LEVEL_RANK[from];
  const written = await db.transaction(async (trx) => {
    const revision = row.current_revision + 1;
    const changed = await trx('cases')
      .where({ id: row.id, row_version: row.row_version })
      .update({
        current_revision: revision,
        field_risk: result.fieldRisk,
        recommended_level: result.activation,
        level_rose: rose || Boolean(row.level_rose),
        eta_at: payload.etaMinutes === undefined ? row.eta_at : payload.etaMinutes === null ? null : at + payload.etaMinutes * 60_000,
        policy_id: result.policy.id,
        policy_version: result.policy.version,
        updated_at: at,
        row_version: row.row_version + 1,
      });
    if (!changed) throw conflict('The case changed while this update was sent; send it again.');
    const stored = await insertRevision(trx, row.id, revision, input, result, payload.etaMinutes ?? null, notes, actor.me.user.id, at);
    await recordCaseEvent(trx, {
      caseId: row.id,
      kind: 'revised',
      actor: actorOf(actor),
      at,
      data: { revision, from, to: result.activation, rose, fieldRisk: result.fieldRisk, criteria: result.criteria.map((c) => c.id), etaMinutes: payload.etaMinutes ?? null },
      policy: result.policy,
    });
    return stored;
  });
  rememberWritten(db, written);
  return { caseId: row.id, rose, from, to: result.activation };
}

export async function cancelCase(db: Knex, clock: Clock, actor: CaseActor, payload: CaseCancel): Promise<{ caseId: number }> {
  const row = await caseForCrew(db, actor.me, payload.caseId);
  const at = clock.now();
  await db.transaction(async (trx) => {
    const changed = await trx('cases').where({ id: row.id, row_version: row.row_version }).update({ state: 'cancelled', cancelled_at: at, cancel_reason: payload.reason, updated_at: at, row_version: row.row_version + 1 });
    if (!changed) throw conflict('The case changed at the same moment; look again before cancelling.');
    await recordCaseEvent(trx, { caseId: row.id, kind: 'cancelled', actor: actorOf(actor), at, before: { state: row.state }, data: { state: 'cancelled', reason: payload.reason } });
  });
  return { caseId: row.id };
}

/** Sends the case to another ED: a fresh start there (not acknowledged), evaluated under its policy. */
export async function redirectCase(db: Knex, clock: Clock, actor: CaseActor, payload: CaseRedirect): Promise<{ caseId: number; fromHospitalId: number }> {
  const row = await caseForCrew(db, actor.me, payload.caseId);
  if (row.hospital_id === payload.hospitalId) throw invalid([{ field: 'hospitalId', message: 'is already this case’s destination' }]);
  const served = await db('agency_hospitals').where({ agency_id: row.agency_id, hospital_id: payload.hospitalId }).first();
  if (!served) throw invalid([{ field: 'hospitalId', message: 'is not a destination of your agency' }]);
  const latest = await db('case_revisions').where({ case_id: row.id, revision: row.current_revision }).first('input', 'eta_minutes', 'notes');
  const input = JSON.parse(latest.input) as ClinicalInput;
  const at = clock.now();
  const result = await evaluateFor(db, payload.hospitalId, input, at);
  const written = await db.transaction(async (trx) => {
    const revision = row.current_revision + 1;
    const changed = await trx('cases').where({ id: row.id, row_version: row.row_version }).update({
      hospital_id: payload.hospitalId,
      state: 'en-route',
      current_revision: revision,
      field_risk: result.fieldRisk,
      recommended_level: result.activation,
      level_rose: false,
      decided_level: null, decided_reason: null, decided_by: null, decided_at: null,
      acknowledged_by: null, acknowledged_at: null, bay: null, paged_at: null, overdue_at: null, escalation_step: 0,
      policy_id: result.policy.id,
      policy_version: result.policy.version,
      updated_at: at,
      row_version: row.row_version + 1,
    });
    if (!changed) throw conflict('The case changed at the same moment; look again before redirecting.');
    const stored = await insertRevision(trx, row.id, revision, input, result, latest.eta_minutes, latest.notes, actor.me.user.id, at);
    await recordCaseEvent(trx, {
      caseId: row.id,
      kind: 'redirected',
      actor: actorOf(actor),
      at,
      before: { hospitalId: row.hospital_id, state: row.state },
      data: { hospitalId: payload.hospitalId, reason: payload.reason, revision, activation: result.activation },
      policy: result.policy,
    });
    return stored;
  });
  rememberWritten(db, written);
  return { caseId: row.id, fromHospitalId: row.hospital_id };
}

export interface CaseFilter {
  hospitalIds?: number[];
  agencyIds?: number[];
  states?: readonly CaseState[];
  ids?: number[];
  /** At most this many, the most urgent first (open lists) or the newest first (history). */
  limit?: number;
  /** The time the urgency order is read at (a case long past its ETA sinks); now when absent. */
  now?: number;
}

/** The longest list one answer carries; past it the answer says how many it leaves out [ours]. */
export const LIST_CAP = 500;

const URGENCY_COLUMNS = ['c.id', 'c.state', 'c.acknowledged_at', 'c.level_rose', 'c.overdue_at', 'c.decided_level', 'c.recommended_level', 'c.eta_at', 'c.created_at', 'c.arrived_at'];
type UrgencyRow = Pick<CaseRow, 'id' | 'state' | 'acknowledged_at' | 'level_rose' | 'overdue_at' | 'decided_level' | 'recommended_level' | 'eta_at' | 'created_at' | 'arrived_at'>;
const urgencyOfRow = (r: UrgencyRow): UrgencyFacts => ({
  id: r.id, state: r.state, acknowledgedAt: num(r.acknowledged_at), levelRose: Boolean(r.level_rose), overdueAt: num(r.overdue_at),
  decidedLevel: r.decided_level, recommendedLevel: r.recommended_level, etaAt: num(r.eta_at), createdAt: Number(r.created_at), arrivedAt: num(r.arrived_at),
});
const openOnly = (filter: CaseFilter) => !!filter.states && filter.states.every((s) => OPEN_STATES.includes(s));

/**
 * The rows a filter selects, in the shared urgency order for open lists (all of them read, so a
 * flood never pushes an urgent case past the cap) or newest first for history, cut at the cap;
 * with how many matched in all, so nothing is left out without saying so.
 */
async function orderedRows<T extends UrgencyRow>(db: Knex, filter: CaseFilter, select: (q: Knex.QueryBuilder) => Knex.QueryBuilder): Promise<{ rows: T[]; total: number }> {
  const cap = filter.limit ?? LIST_CAP;
  if (openOnly(filter) || filter.ids) {
    const rows = (await select(filteredCases(db, filter))) as T[];
    const now = filter.now ?? Date.now();
    const facts = new Map(rows.map((r) => [r.id, urgencyOfRow(r)]));
    rows.sort((a, b) => compareUrgency(facts.get(a.id)!, facts.get(b.id)!, now));
    return { rows: rows.slice(0, cap), total: rows.length };
  }
  const rows = (await select(filteredCases(db, filter)).orderBy([{ column: 'c.created_at', order: 'desc' }, { column: 'c.id', order: 'desc' }]).limit(cap)) as T[];
  const total = rows.length < cap ? rows.length : Number((await filteredCases(db, filter).count({ n: '*' }).first())?.n ?? rows.length);
  return { rows, total };
}

interface ParsedRevision { input: ClinicalInput; result: Evaluation }

// Parsed input and evaluation of recent revisions, per database. A revision row is never changed
// once written, so an entry cannot go stale; without it every board's reload after a restart or
// a dropped link parsed each open case's JSON again (250 open cases: about a third of the
// listing's time), all while the live pre-alerts waited behind it. Only committed rows go in,
// so a transaction that rolls back cannot leave a revision that never was.
const REVISION_CACHE_SIZE = 2000;
const revisionCaches = new WeakMap<Knex, Map<string, ParsedRevision>>();
const revisionKey = (caseId: number, revision: number) => `${caseId}:${revision}`;

function revisionCacheOf(db: Knex): Map<string, ParsedRevision> | null {
  if (db.isTransaction) return null;
  let cache = revisionCaches.get(db);
  if (!cache) revisionCaches.set(db, (cache = new Map()));
  return cache;
}

function rememberRevision(cache: Map<string, ParsedRevision> | null, key: string, parsed: ParsedRevision): void {
  if (!cache) return;
  cache.delete(key);
  cache.set(key, parsed);
  // Oldest first out: the open cases a board reloads were written or read most recently.
  if (cache.size > REVISION_CACHE_SIZE) cache.delete(cache.keys().next().value!);
}

/** The parsed JSON of these revisions, reading from the table only those not in the cache. */
async function parsedRevisions(db: Knex, wanted: Array<[caseId: number, revision: number]>): Promise<Map<string, ParsedRevision>> {
  const cache = revisionCacheOf(db);
  const found = new Map<string, ParsedRevision>();
  const missing: Array<[number, number]> = [];
  for (const [caseId, revision] of wanted) {
    const key = revisionKey(caseId, revision);
    const hit = cache?.get(key);
    if (hit) found.set(key, hit);
    else missing.push([caseId, revision]);
  }
  for (let i = 0; i < missing.length; i += 400) {
    const rows = await db('case_revisions').whereIn(['case_id', 'revision'], missing.slice(i, i + 400)).select('case_id', 'revision', 'input', 'result');
    for (const row of rows) {
      const key = revisionKey(row.case_id, row.revision);
      const parsed = { input: JSON.parse(row.input) as ClinicalInput, result: JSON.parse(row.result) as Evaluation };
      found.set(key, parsed);
      rememberRevision(cache, key, parsed);
    }
  }
  return found;
}

/** The cases a filter selects, with the names a summary shows joined in; orderedRows orders and cuts. */
function filteredCases(db: Knex, filter: CaseFilter): Knex.QueryBuilder {
  const query = db('cases as c')
    .join('hospitals as h', 'h.id', 'c.hospital_id')
    .join('agencies as a', 'a.id', 'c.agency_id')
    .leftJoin('units as u', 'u.id', 'c.unit_id')
    .leftJoin('users as ack', 'ack.id', 'c.acknowledged_by')
    .leftJoin('users as dec', 'dec.id', 'c.decided_by');
  if (filter.ids) query.whereIn('c.id', filter.ids);
  if (filter.states) query.whereIn('c.state', filter.states as CaseState[]);
  if (filter.hospitalIds || filter.agencyIds) {
    query.where((w) => {
      if (filter.hospitalIds) w.orWhereIn('c.hospital_id', filter.hospitalIds);
      if (filter.agencyIds) w.orWhereIn('c.agency_id', filter.agencyIds);
    });
  }
  return query;
}

type ListedRow = CaseRow & {
  hospital_name: string; height_unit: CaseSummary['hospital']['heightUnit']; agency_name: string;
  /** Null only when unit_id is, and then no unit is shown. */
  call_sign: string;
  acknowledged_by_name: string | null; decided_by_name: string | null;
};

/** Case summaries in the urgency order (history: newest first), in three queries whatever the count (two once the revisions are cached). */
export async function listCaseSummaries(db: Knex, filter: CaseFilter): Promise<CaseSummary[]> {
  const { rows } = await orderedRows<ListedRow>(db, filter, (q) => q.select('c.*', 'h.name as hospital_name', 'h.height_unit', 'a.name as agency_name', 'u.call_sign', 'ack.name as acknowledged_by_name', 'dec.name as decided_by_name'));
  if (!rows.length) return [];
  const ids = rows.map((r) => r.id as number);
  const revisions = await db('case_revisions as r')
    .join('cases as c', function () {
      this.on('c.id', '=', 'r.case_id').andOn(function () {
        this.on('r.revision', '=', 'c.current_revision').orOn('r.revision', '=', db.raw('1'));
      });
    })
    .leftJoin('users as by', 'by.id', 'r.created_by')
    .whereIn('r.case_id', ids)
    .select('r.case_id', 'r.revision', 'r.eta_minutes', 'r.notes', 'r.created_at', 'by.name as created_by_name', 'c.current_revision');
  const parsed = await parsedRevisions(db, revisions.map((r) => [r.case_id as number, r.revision as number]));
  const latest = new Map<number, (typeof revisions)[number]>();
  const first = new Map<number, (typeof revisions)[number]>();
  for (const rev of revisions) {
    if (rev.revision === rev.current_revision) latest.set(rev.case_id, rev);
    if (rev.revision === 1) first.set(rev.case_id, rev);
  }
  return rows.map((row) => {
    const rev = latest.get(row.id)!;
    const { input, result } = parsed.get(revisionKey(row.id, rev.revision))!;
    const firstRev = first.get(row.id) ?? rev;
    const firstInput = parsed.get(revisionKey(row.id, firstRev.revision))!.input;
    return {
      id: row.id,
      caseNumber: row.case_number,
      clientId: row.client_id,
      state: row.state,
      hospital: { id: row.hospital_id, name: row.hospital_name, heightUnit: row.height_unit },
      agency: { id: row.agency_id, name: row.agency_name },
      unit: row.unit_id == null ? null : { id: row.unit_id, callSign: row.call_sign },
      createdAt: Number(row.created_at),
      updatedAt: Number(row.updated_at),
      etaAt: num(row.eta_at),
      revision: row.current_revision,
      latest: { revision: rev.revision, input, result, etaMinutes: rev.eta_minutes, notes: rev.notes, createdAt: Number(rev.created_at), createdBy: rev.created_by_name },
      firstVitals: firstInput.vitals ?? null,
      fieldRisk: row.field_risk,
      recommendedLevel: row.recommended_level,
      levelRose: Boolean(row.level_rose),
      decidedLevel: row.decided_level,
      decidedReason: row.decided_reason,
      decidedAt: num(row.decided_at),
      decidedBy: row.decided_by_name ?? null,
      acknowledgedAt: num(row.acknowledged_at),
      acknowledgedBy: row.acknowledged_by_name ?? null,
      bay: row.bay,
      pagedAt: num(row.paged_at),
      arrivedAt: num(row.arrived_at),
      teamAtBedsideAt: num(row.team_at_bedside_at),
      closedAt: num(row.closed_at),
      cancelledAt: num(row.cancelled_at),
      cancelReason: row.cancel_reason,
      overdueAt: num(row.overdue_at),
      policy: { id: row.policy_id, version: row.policy_version, example: result.policy.example },
      source: row.source ?? null,
      rowVersion: row.row_version,
    } satisfies CaseSummary;
  });
}

export async function caseSummary(db: Knex, caseId: number): Promise<CaseSummary> {
  const [summary] = await listCaseSummaries(db, { ids: [caseId] });
  if (!summary) throw notFound('That case');
  return summary;
}

// A board or crew screen reloads its open cases after every connection that did not recover
// (a restart, a dropped link), and every screen of one hospital asks for the same list at about
// the same moment. Each case's summary is kept here as JSON text, under a key made of everything
// it shows that can change: the case row's row_version (every change to a case bumps it) and the
// names joined into it (a renamed nurse, unit or hospital shows at once). A reload reads the keys
// of the cases in view in one indexed query of a few columns, builds only the summaries whose key
// moved, and joins the kept texts. The key is read from the database each time, so the cache
// stays true with several server processes on one database. Revisions never change once written.
// Four times the longest list one reload reads (500): a region's open cases, about 3 kB each.
const SUMMARY_TEXT_CACHE_SIZE = 2000;
const summaryTexts = new WeakMap<Knex, Map<number, { key: string; text: string }>>();

interface SummaryKeyRow extends UrgencyRow {
  id: number; row_version: number; hospital_name: string; height_unit: string; agency_name: string;
  call_sign: string | null; ack_name: string | null; dec_name: string | null; by_name: string | null;
}
const summaryKeyOf = (r: SummaryKeyRow) => [r.row_version, r.hospital_name, r.height_unit, r.agency_name, r.call_sign, r.ack_name, r.dec_name, r.by_name].join('\u0000');

/** The same cases as `listCaseSummaries`, in the same order, as one JSON array's text. */
export async function listCaseSummariesJson(db: Knex, filter: CaseFilter): Promise<string> {
  return `[${(await caseSummaryTexts(db, filter)).texts.join(',')}]`;
}

/** As listCaseSummariesJson, with how many cases matched in all (more than listed when the cap cut the list). */
export async function listCaseSummariesPage(db: Knex, filter: CaseFilter): Promise<{ json: string; total: number; listed: number }> {
  const { texts, total } = await caseSummaryTexts(db, filter);
  return { json: `[${texts.join(',')}]`, total, listed: texts.length };
}

/** The same cases as `listCaseSummaries`, in the same order, each as its JSON text. */
async function caseSummaryTexts(db: Knex, filter: CaseFilter): Promise<{ texts: string[]; total: number }> {
  if (db.isTransaction) {
    const all = await listCaseSummaries(db, { ...filter, limit: undefined });
    const cap = filter.limit ?? LIST_CAP;
    return { texts: all.slice(0, cap).map((summary) => JSON.stringify(summary)), total: all.length };
  }
  let cache = summaryTexts.get(db);
  if (!cache) summaryTexts.set(db, (cache = new Map()));
  const { rows: keyRows, total } = await orderedRows<SummaryKeyRow>(db, filter, (q) =>
    q
      .leftJoin('case_revisions as r', function () {
        this.on('r.case_id', '=', 'c.id').andOn('r.revision', '=', 'c.current_revision');
      })
      .leftJoin('users as by', 'by.id', 'r.created_by')
      .select(...URGENCY_COLUMNS, 'c.row_version', 'h.name as hospital_name', 'h.height_unit', 'a.name as agency_name', 'u.call_sign', 'ack.name as ack_name', 'dec.name as dec_name', 'by.name as by_name'),
  );
  const keys = keyRows.map(summaryKeyOf);
  const texts = keyRows.map((row, i) => {
    const kept = cache.get(row.id);
    return kept?.key === keys[i] ? kept.text : undefined;
  });
  const stale = keyRows.filter((_, i) => texts[i] === undefined).map((row) => row.id);
  if (stale.length) {
    const at = new Map(keyRows.map((row, i) => [row.id, i]));
    for (const summary of await listCaseSummaries(db, { ids: stale, limit: stale.length })) {
      const i = at.get(summary.id)!;
      texts[i] = JSON.stringify(summary);
      // Changed between the two reads: served as it is now, and not kept under the older key.
      if (summary.rowVersion !== keyRows[i].row_version) continue;
      cache.delete(summary.id);
      cache.set(summary.id, { key: keys[i], text: texts[i]! });
      if (cache.size > SUMMARY_TEXT_CACHE_SIZE) cache.delete(cache.keys().next().value!);
    }
  }
  return { texts: texts.filter((text) => text !== undefined), total };
}

/**
 * Fills the kept summary texts with every hospital's open cases, as a server starts: the boards
 * and crews that reconnect after a restart then read them instead of building them while the
 * first pre-alerts wait. Answers how many cases it read.
 */
export async function primeCaseLists(db: Knex): Promise<number> {
  const hospitals = (await db('cases').whereIn('state', OPEN_STATES).distinct('hospital_id')) as Array<{ hospital_id: number }>;
  let cases = 0;
  for (const { hospital_id } of hospitals) cases += (await caseSummaryTexts(db, { hospitalIds: [hospital_id], states: OPEN_STATES })).texts.length;
  return cases;
}

export async function caseRevisions(db: Knex, caseId: number) {
  const rows = await db('case_revisions as r').leftJoin('users as u', 'u.id', 'r.created_by').where('r.case_id', caseId).orderBy('r.revision').select('r.*', 'u.name as created_by_name');
  return rows.map((r) => ({ revision: r.revision, input: JSON.parse(r.input) as ClinicalInput, result: JSON.parse(r.result) as Evaluation, etaMinutes: r.eta_minutes, notes: r.notes, createdAt: Number(r.created_at), createdBy: r.created_by_name }));
}

export async function caseEvents(db: Knex, caseId: number): Promise<CaseEventView[]> {
  const rows = await db('case_events as e').leftJoin('users as u', 'u.id', 'e.actor_id').where('e.case_id', caseId).orderBy([{ column: 'e.at' }, { column: 'e.id' }]).select('e.*', 'u.name as actor_name');
  return rows.map((r) => ({ id: r.id, kind: r.kind, at: Number(r.at), actor: r.actor_name ?? null, actorRole: r.actor_role, data: r.data ? JSON.parse(r.data) : null }));
}

