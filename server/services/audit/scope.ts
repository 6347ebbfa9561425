import type { Knex } from 'knex';
import type { Me } from '../../../shared/roles';
import type { AuditChainStatus } from '../../../shared/schemas/review';
import { hospitalIdsOf } from '../../auth/guards';
import { verifyAuditChain } from './audit';

/**
 * The audit chain's state as one reader may see it. The whole chain is checked (a break anywhere
 * concerns everyone who relies on the record), but the count is of the rows about the reader's
 * own hospitals (their cases, their policies and the hospitals' own records): how busy other
 * hospitals are is not theirs to read.
 */
export async function auditChainFor(db: Knex, me: Me, at: number): Promise<AuditChainStatus> {
  const check = await verifyAuditChain(db);
  const rows = await auditRowsOfHospitals(db, hospitalIdsOf(me));
  return check.ok ? { ok: true, rows, checkedAt: at } : { ok: false, rows, brokenAt: check.brokenAt, reason: check.reason, checkedAt: at };
}

export async function auditRowsOfHospitals(db: Knex, hospitalIds: number[]): Promise<number> {
  if (!hospitalIds.length) return 0;
  const ids = hospitalIds.map(String);
  const row = await db('audit_log as l')
    .where((w) =>
      w
        .whereIn('l.case_id', db('cases').whereIn('hospital_id', hospitalIds).select('id'))
        .orWhere((h) => h.where('l.entity', 'hospital').whereIn('l.entity_id', ids))
        .orWhere((p) => p.where('l.entity', 'policy').whereIn('l.entity_id', db('policy_versions').whereIn('hospital_id', hospitalIds).select(db.raw('CAST(id AS TEXT)')))),
    )
    .count({ n: '*' })
    .first();
  return Number(row?.n ?? 0);
}
