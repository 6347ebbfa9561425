// Changing a case from the ambulance: a new pre-alert, an update en route, a cancel, a redirect.
import type { Knex } from 'knex';
import type { Me, Role } from '../../../shared/roles';
import type { CaseCancel, CaseRedirect, PreAlert, PreAlertUpdate } from '../../../shared/schemas/cases';
import type { ClinicalInput } from '../../../shared/schemas/clinical';
import { applyClinicalChanges, MergedClinical } from '../../../shared/schemas/clinical-changes';
import { evaluate, type Evaluation } from '../../../shared/triage/evaluate';
import { LEVEL_RANK, type LevelId } from '../../../shared/triage/policy';
import { agencyIdsOf } from '../../auth/guards';
import type { Clock } from '../../deps';
import { CaseRefusal, conflict, forbidden, invalid, parseOr400 } from '../../errors';
import { recordCaseEvent, type Actor } from '../audit/audit';
import { policyInForce } from '../policies/policies';
import { caseNumberOf, loadCaseRow, type CaseRow } from './queries';
import { storeEvaluationInput } from './evaluation-input';
import { caseSummary, rememberRevision } from './summary';

/** Who changes a case: a person in a role, or a registered machine client, named by `source`. */
export interface CaseActor { me: Me; role: Role | 'machine_client'; source?: string }
const actorOf = (a: CaseActor): Actor => ({ id: a.me.user.id, role: a.role });

/**
 * A change refused because the case is no longer as the crew saw it: the refusal carries the case
 * as it now stands. Read after the transaction has ended: SQLite has one connection.
 */
async function refuse(db: Knex, caseId: number, message: string): Promise<never> {
  throw new CaseRefusal(409, 'conflict', message, await caseSummary(db, caseId));
}

/** The case, if it is this paramedic's agency's and still open. */
async function caseForCrew(db: Knex, me: Me, caseId: number): Promise<CaseRow> {
  const row = await loadCaseRow(db, caseId);
  if (!agencyIdsOf(me).includes(row.agency_id)) throw forbidden('That case belongs to another ambulance agency.');
  if (row.state === 'closed' || row.state === 'cancelled') return refuse(db, row.id, `Case ${row.case_number} is ${row.state}; it can no longer be changed.`);
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
  rememberRevision(db, written.caseId, written.revision, { input: JSON.parse(written.input) as ClinicalInput, result: JSON.parse(written.result) as Evaluation });
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
    if (!changed) return null;
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
  if (!written) return refuse(db, row.id, 'The case changed while this update was sent; send it again.');
  rememberWritten(db, written);
  return { caseId: row.id, rose, from, to: result.activation };
}

export async function cancelCase(db: Knex, clock: Clock, actor: CaseActor, payload: CaseCancel): Promise<{ caseId: number }> {
  const row = await caseForCrew(db, actor.me, payload.caseId);
  const at = clock.now();
  const won = await db.transaction(async (trx) => {
    const changed = await trx('cases').where({ id: row.id, row_version: row.row_version }).update({ state: 'cancelled', cancelled_at: at, cancel_reason: payload.reason, updated_at: at, row_version: row.row_version + 1 });
    if (!changed) return false;
    await recordCaseEvent(trx, { caseId: row.id, kind: 'cancelled', actor: actorOf(actor), at, before: { state: row.state }, data: { state: 'cancelled', reason: payload.reason } });
    return true;
  });
  if (!won) return refuse(db, row.id, 'The case changed at the same moment; look again before cancelling.');
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
    if (!changed) return null;
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
  if (!written) return refuse(db, row.id, 'The case changed at the same moment; look again before redirecting.');
  rememberWritten(db, written);
  return { caseId: row.id, fromHospitalId: row.hospital_id };
}
