// Reading one case: its row, who may read it, its revisions and its timeline of events.
import type { Knex } from 'knex';
import type { Me } from '../../../shared/roles';
import type { CaseEventView, CaseState } from '../../../shared/schemas/cases';
import type { ClinicalInput } from '../../../shared/schemas/clinical';
import type { Evaluation, FieldRisk } from '../../../shared/triage/evaluate';
import type { LevelId } from '../../../shared/triage/policy';
import { agencyIdsOf, hospitalIdsOf } from '../../auth/guards';
import { forbidden, notFound } from '../../errors';

export interface CaseRow {
  id: number; case_number: string; client_id: string; agency_id: number; unit_id: number | null; hospital_id: number;
  created_by: number; state: CaseState; current_revision: number; eta_at: number | null; field_risk: FieldRisk;
  recommended_level: LevelId; level_rose: number | boolean; decided_level: LevelId | null; decided_reason: string | null;
  decided_by: number | null; decided_at: number | null; acknowledged_by: number | null; acknowledged_at: number | null;
  bay: string | null; paged_at: number | null; arrived_at: number | null; team_at_bedside_at: number | null;
  closed_at: number | null; cancelled_at: number | null; cancel_reason: string | null; overdue_at: number | null;
  policy_id: string; policy_version: number; created_at: number; updated_at: number; row_version: number;
  source: string | null;
}


export const num = (v: unknown) => (v == null ? null : Number(v));

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

export async function caseRevisions(db: Knex, caseId: number) {
  const rows = await db('case_revisions as r').leftJoin('users as u', 'u.id', 'r.created_by').where('r.case_id', caseId).orderBy('r.revision').select('r.*', 'u.name as created_by_name');
  return rows.map((r) => ({ revision: r.revision, input: JSON.parse(r.input) as ClinicalInput, result: JSON.parse(r.result) as Evaluation, etaMinutes: r.eta_minutes, notes: r.notes, createdAt: Number(r.created_at), createdBy: r.created_by_name }));
}

export async function caseEvents(db: Knex, caseId: number): Promise<CaseEventView[]> {
  const rows = await db('case_events as e').leftJoin('users as u', 'u.id', 'e.actor_id').where('e.case_id', caseId).orderBy([{ column: 'e.at' }, { column: 'e.id' }]).select('e.*', 'u.name as actor_name');
  return rows.map((r) => ({ id: r.id, kind: r.kind, at: Number(r.at), actor: r.actor_name ?? null, actorRole: r.actor_role, data: r.data ? JSON.parse(r.data) : null }));
}

