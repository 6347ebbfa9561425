import { createHash } from 'node:crypto';
import type { Knex } from 'knex';

export interface Actor { id: number | null; role: string | null }
export const systemActor: Actor = { id: null, role: 'system' };

export interface AuditEntry {
  at: number;
  actor: Actor;
  action: string;
  entity: 'case' | 'policy' | 'user' | 'hospital' | 'agency' | 'unit' | 'membership' | 'outcome' | 'review' | 'setting' | 'list';
  entityId?: string | number | null;
  caseId?: number | null;
  before?: unknown;
  after?: unknown;
  policy?: { id: string; version: number } | null;
}

export const GENESIS_HASH = '0'.repeat(64);

interface AuditRow {
  id: number;
  at: number;
  actor_id: number | null;
  actor_role: string | null;
  action: string;
  entity: string;
  entity_id: string | null;
  case_id: number | null;
  before: string | null;
  after: string | null;
  policy_id: string | null;
  policy_version: number | null;
  prev_hash: string;
  hash: string;
}

const json = (value: unknown) => (value === undefined || value === null ? null : JSON.stringify(value));

/** The hash covers every column but the id, and the previous row's hash, so no row can change alone. */
export function rowHash(row: Omit<AuditRow, 'id' | 'hash'>): string {
  const content = JSON.stringify([
    Number(row.at), row.actor_id, row.actor_role, row.action, row.entity, row.entity_id, row.case_id,
    row.before, row.after, row.policy_id, row.policy_version,
  ]);
  return createHash('sha256').update(row.prev_hash).update('\n').update(content).digest('hex');
}

/** The chain's newest row, the one the next row links to; undefined while the chain is empty. */
export async function newestAuditRow(db: Knex): Promise<{ id: number; hash: string } | undefined> {
  return db('audit_log').orderBy('id', 'desc').first('id', 'hash');
}

/**
 * Appends one row. Call it inside the transaction that makes the change, so the record and the
 * change commit together; SQLite's single writer keeps the chain in order.
 */
export async function appendAudit(db: Knex, entry: AuditEntry): Promise<number> {
  const last = await newestAuditRow(db);
  const row = {
    at: entry.at,
    actor_id: entry.actor.id,
    actor_role: entry.actor.role,
    action: entry.action,
    entity: entry.entity,
    entity_id: entry.entityId == null ? null : String(entry.entityId),
    case_id: entry.caseId ?? null,
    before: json(entry.before),
    after: json(entry.after),
    policy_id: entry.policy?.id ?? null,
    policy_version: entry.policy?.version ?? null,
    prev_hash: last?.hash ?? GENESIS_HASH,
  };
  const [inserted] = await db('audit_log').insert({ ...row, hash: rowHash(row) }).returning('id');
  return inserted.id;
}

export type ChainCheck = { ok: true; rows: number } | { ok: false; rows: number; brokenAt: number; reason: string };

/**
 * Rows read and hashed at a time. Each batch runs on the event loop without a break, so it is
 * kept small enough that a long check does not hold up the boards' live updates for long.
 */
const CHECK_BATCH = 1000;

// Checks already under way, per database: two leads opening the review screen at once share one walk.
const checking = new WeakMap<Knex, Promise<ChainCheck>>();

/** Walks the whole chain in id order and names the first row whose hash or link does not hold. */
export function verifyAuditChain(db: Knex): Promise<ChainCheck> {
  let check = checking.get(db);
  if (!check) {
    check = walkChain(db).finally(() => checking.delete(db));
    checking.set(db, check);
  }
  return check;
}

async function walkChain(db: Knex): Promise<ChainCheck> {
  let prev = GENESIS_HASH;
  let rows = 0;
  let lastId = 0;
  for (;;) {
    const batch: AuditRow[] = await db('audit_log').where('id', '>', lastId).orderBy('id').limit(CHECK_BATCH);
    if (!batch.length) return { ok: true, rows };
    for (const row of batch) {
      rows++;
      if (row.prev_hash !== prev) return { ok: false, rows, brokenAt: row.id, reason: 'its link to the previous row does not match (a row was removed or inserted)' };
      if (rowHash(row) !== row.hash) return { ok: false, rows, brokenAt: row.id, reason: 'its content does not match its hash (the row was changed)' };
      prev = row.hash;
      lastId = row.id;
    }
  }
}

export interface CaseEvent {
  caseId: number;
  kind: string;
  actor: Actor;
  at: number;
  data?: unknown;
  before?: unknown;
  after?: unknown;
  policy?: { id: string; version: number } | null;
}

/** One step on a case: the case's own timeline row and its audit row, in the caller's transaction. */
export async function recordCaseEvent(db: Knex, event: CaseEvent): Promise<void> {
  await db('case_events').insert({
    case_id: event.caseId,
    kind: event.kind,
    actor_id: event.actor.id,
    actor_role: event.actor.role,
    at: event.at,
    data: json(event.data),
  });
  await appendAudit(db, {
    at: event.at,
    actor: event.actor,
    action: `case.${event.kind}`,
    entity: 'case',
    entityId: event.caseId,
    caseId: event.caseId,
    before: event.before,
    after: event.after ?? event.data,
    policy: event.policy,
  });
}
