import { createHash, createHmac } from 'node:crypto';
import type { Knex } from 'knex';
import { auditKeyId } from '../../audit-key';
import type { CaseEventDataOf, CaseEventKind } from '../../../shared/schemas/case-events';

export interface Actor { id: number | null; role: string | null }
export const systemActor: Actor = { id: null, role: 'system' };

export interface AuditEntry {
  at: number;
  actor: Actor;
  action: string;
  entity: 'case' | 'policy' | 'user' | 'hospital' | 'agency' | 'unit' | 'membership' | 'outcome' | 'review' | 'setting' | 'list' | 'audit';
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

/**
 * The hash covers every column but the id, and the previous row's hash, so no row can change
 * alone. With a key it is an HMAC-SHA-256, which nobody without the key can compute; without one
 * (the rows written before the chain had a key) it is plain SHA-256.
 */
export function rowHash(row: Omit<AuditRow, 'id' | 'hash'>, key: Buffer | null): string {
  const content = JSON.stringify([
    Number(row.at), row.actor_id, row.actor_role, row.action, row.entity, row.entity_id, row.case_id,
    row.before, row.after, row.policy_id, row.policy_version,
  ]);
  return (key ? createHmac('sha256', key) : createHash('sha256')).update(row.prev_hash).update('\n').update(content).digest('hex');
}

// Each database's key, bound when it is opened (createDb). Keyed by the Knex client's settings
// object, which a transaction shares with the instance it came from.
interface KeyState { key: Buffer; keyId: string; keyedFrom: number | null }
const keys = new WeakMap<object, KeyState>();

/** Binds the audit key to a database and everything (transactions) made from it. */
export function useAuditKey(db: Knex, key: Buffer): void {
  keys.set(db.client.config, { key, keyId: auditKeyId(key), keyedFrom: null });
}

function keyState(db: Knex): KeyState {
  const state = keys.get(db.client.config);
  if (!state) throw new Error('this database was opened without an audit key (open it with createDb)');
  return state;
}

/** The database's audit key (for signing checkpoints). */
export const auditKeyOf = (db: Knex): Buffer => keyState(db).key;

export interface KeyedStart { keyedFrom: number; keyId: string; at: number }

/** Where the keyed part of the chain starts; undefined while no keyed row has been written. */
export async function keyedStart(db: Knex): Promise<KeyedStart | undefined> {
  // A database not yet migrated to the keyed chain (read by `audit verify`) has no start.
  if (!(await db.schema.hasTable('audit_chain'))) return undefined;
  const row = await db('audit_chain').orderBy('id').first('keyed_from', 'key_id', 'at');
  return row ? { keyedFrom: Number(row.keyed_from), keyId: row.key_id, at: Number(row.at) } : undefined;
}

/** The chain's newest row, the one the next row links to; undefined while the chain is empty. */
export async function newestAuditRow(db: Knex): Promise<{ id: number; hash: string } | undefined> {
  return db('audit_log').orderBy('id', 'desc').first('id', 'hash');
}

/**
 * The PostgreSQL advisory lock that serialises appends to the chain (an arbitrary fixed number,
 * the same in every process). SQLite needs none: it has one writer at a time.
 */
export const AUDIT_APPEND_LOCK = 7_211_458_301;

/**
 * Appends one row. Call it inside the transaction that makes the change, so the record and the
 * change commit together. SQLite's single writer keeps the chain in order; on PostgreSQL the
 * append takes a transaction-level advisory lock, held until that transaction ends, so one writer
 * at a time reads the head and links to it, and the rows' ids follow the order of their commits
 * (which the boards' changes-since cursor relies on). The first row written with a key records
 * itself as the start of the keyed chain, in the same transaction.
 */
export async function appendAudit(db: Knex, entry: AuditEntry): Promise<number> {
  const [id] = await appendAudits(db, [entry]);
  return id;
}

/**
 * Appends several rows in order, linked one to the next, with one read of the chain's head and
 * one insert: a large import records thousands of rows, and a query per row held the database.
 * Same rules as appendAudit: inside the transaction that makes the changes. Answers their ids.
 */
export async function appendAudits(db: Knex, entries: AuditEntry[]): Promise<number[]> {
  if (!entries.length) return [];
  const state = keyState(db);
  if (db.client.config.client === 'pg') {
    // Outside a transaction the lock would end with its own statement: make one.
    if (!db.isTransaction) return db.transaction((trx) => appendAudits(trx, entries));
    await db.raw('SELECT pg_advisory_xact_lock(?)', [AUDIT_APPEND_LOCK]);
  }
  let prevHash = (await newestAuditRow(db))?.hash ?? GENESIS_HASH;
  const rows = entries.map((entry) => {
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
      prev_hash: prevHash,
    };
    prevHash = rowHash(row, state.key);
    return { ...row, hash: prevHash };
  });
  // Inserted in the given order, so the ids follow the chain; 500 rows stay within SQLite's bound parameters.
  const ids: number[] = [];
  for (let i = 0; i < rows.length; i += 500) {
    const inserted = (await db('audit_log').insert(rows.slice(i, i + 500)).returning('id')) as Array<{ id: number }>;
    ids.push(...inserted.map((r) => r.id).sort((a, b) => a - b));
  }
  // Kept only once read back from the database: a start written in a transaction that rolls back never counts.
  if (state.keyedFrom === null) {
    const start = await keyedStart(db);
    if (start) state.keyedFrom = start.keyedFrom;
    else await db('audit_chain').insert({ keyed_from: ids[0], key_id: state.keyId, at: entries[0].at });
  }
  return ids;
}

/**
 * A database whose chain began before it had a key: one `audit.keyed` row links the old part to
 * the keyed part, so the keyed chain starts at a row anyone can see. Nothing is rewritten.
 */
export async function startKeyedChain(db: Knex, at: number): Promise<void> {
  if (await keyedStart(db)) return;
  const rows = Number((await db('audit_log').count({ n: '*' }).first())?.n ?? 0);
  if (!rows) return;
  await db.transaction((trx) => appendAudit(trx, { at, actor: systemActor, action: 'audit.keyed', entity: 'audit', after: { rowsBefore: rows } }));
}

export type ChainCheck =
  | { ok: true; rows: number; keyedFrom: number | null }
  | { ok: false; rows: number; brokenAt: number; reason: string };

/**
 * Rows read and hashed at a time. Each batch runs on the event loop without a break, so it is
 * kept small enough that a long check does not hold up the boards' live updates for long.
 */
const CHECK_BATCH = 1000;

// Checks already under way, per database: two leads opening the review screen at once share one walk.
const checking = new WeakMap<Knex, Promise<ChainCheck>>();

/**
 * Walks the whole chain in id order and names the first row whose hash or link does not hold.
 * Rows before the keyed start are checked with SHA-256, the rest with the database's key.
 */
export function verifyAuditChain(db: Knex): Promise<ChainCheck> {
  let check = checking.get(db);
  if (!check) {
    check = walkChain(db).finally(() => checking.delete(db));
    checking.set(db, check);
  }
  return check;
}

async function walkChain(db: Knex): Promise<ChainCheck> {
  const { key, keyId } = keyState(db);
  const start = await keyedStart(db);
  if (start && start.keyId !== keyId) {
    return { ok: false, rows: 0, brokenAt: start.keyedFrom, reason: `the chain was keyed with another audit key (key id ${start.keyId}, this one is ${keyId})` };
  }
  const keyedFrom = start?.keyedFrom ?? null;
  let prev = GENESIS_HASH;
  let rows = 0;
  let lastId = 0;
  for (;;) {
    const batch: AuditRow[] = await db('audit_log').where('id', '>', lastId).orderBy('id').limit(CHECK_BATCH);
    if (!batch.length) {
      if (keyedFrom !== null && lastId < keyedFrom) return { ok: false, rows, brokenAt: keyedFrom, reason: 'the row where the keyed chain starts is missing (rows were removed)' };
      return { ok: true, rows, keyedFrom };
    }
    for (const row of batch) {
      rows++;
      if (row.prev_hash !== prev) return { ok: false, rows, brokenAt: row.id, reason: 'its link to the previous row does not match (a row was removed or inserted)' };
      const keyed = keyedFrom !== null && row.id >= keyedFrom;
      if (rowHash(row, keyed ? key : null) !== row.hash) return { ok: false, rows, brokenAt: row.id, reason: 'its content does not match its hash (the row was changed)' };
      prev = row.hash;
      lastId = row.id;
    }
  }
}

/** One step on a case: its kind decides what `data` records (shared/schemas/case-events.ts). */
export interface CaseEvent<K extends CaseEventKind = CaseEventKind> {
  caseId: number;
  kind: K;
  actor: Actor;
  at: number;
  data: CaseEventDataOf[K];
  before?: unknown;
  after?: unknown;
  policy?: { id: string; version: number } | null;
}

/** One step on a case: the case's own timeline row and its audit row, in the caller's transaction. */
export async function recordCaseEvent<K extends CaseEventKind>(db: Knex, event: CaseEvent<K>): Promise<void> {
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
