import type { Knex } from 'knex';
import type { Disposition, ImportIssue, ImportPreview, OutcomeRecord, PreviewRow } from '../../../shared/schemas/quality';
import { appendAudit, appendAudits, systemActor, type Actor } from '../audit/audit';
import { nextTurn, type ParsedRow } from './parse';

// Checked rows matched to this hospital's cases, then saved. The save is staged in short
// transactions, which let pre-alerts through between them, and then made visible by one
// statement, so a file is either all in or not at all.

const NFTI_FIELDS = ['minutesToOperatingRoom', 'minutesToInterventionalRadiology', 'icuDays', 'hoursToVentilation', 'hoursToDeath'] as const;
type NftiTimeField = (typeof NFTI_FIELDS)[number];
const DB_COLUMN: Record<NftiTimeField, string> = {
  minutesToOperatingRoom: 'minutes_to_or',
  minutesToInterventionalRadiology: 'minutes_to_ir',
  icuDays: 'icu_days',
  hoursToVentilation: 'hours_to_ventilation',
  hoursToDeath: 'hours_to_death',
};

/**
 * The pause between two writes of an import. A turn alone (setImmediate) lets one socket read
 * through, but a pre-alert takes several turns (read, checks, queries, fan-out, answer), and each
 * would wait for another chunk of the import; a busy process also waits longer for a core on a
 * loaded machine. A short sleep lets the server answer what is waiting before the import goes on.
 */
const IMPORT_PAUSE_MS = 2;
const breathe = () => new Promise<void>((resolve) => setTimeout(resolve, IMPORT_PAUSE_MS));

/** Rows checked between turns of the event loop. */
const ROWS_PER_TURN = 200;

interface CaseRef { id: number; state: string; hasOutcome: boolean }

/** Looks every case number up at this hospital; unknown, cancelled and repeated numbers are row errors. */
export async function resolveCases(db: Knex, hospitalId: number, rows: ParsedRow[]): Promise<{ preview: PreviewRow[]; errors: ImportIssue[] }> {
  const numbers = [...new Set(rows.flatMap((r) => (r.record ? [r.record.caseNumber] : [])))];
  const found = new Map<string, CaseRef>();
  for (let i = 0; i < numbers.length; i += 500) {
    const chunk = numbers.slice(i, i + 500);
    const cases = await db('cases as c')
      .leftJoin('outcomes as o', 'o.case_id', 'c.id')
      .where('c.hospital_id', hospitalId)
      .whereIn('c.case_number', chunk)
      .select('c.id', 'c.case_number', 'c.state', 'o.case_id as outcome_case');
    for (const c of cases) found.set(c.case_number, { id: c.id, state: c.state, hasOutcome: c.outcome_case != null });
    // SQLite answers at once, so awaiting a query alone never lets a pre-alert's socket be read.
    await nextTurn();
  }
  const hospital = await db('hospitals').where({ id: hospitalId }).first('name');
  const errors: ImportIssue[] = [];
  const firstRowOf = new Map<string, number>();
  const check = (parsed: ParsedRow): PreviewRow => {
    errors.push(...parsed.issues);
    if (!parsed.record) return { row: parsed.row, caseNumber: parsed.caseNumber, caseId: null, record: null, action: null, warnings: [] };
    const { caseNumber } = parsed.record;
    const fail = (message: string): PreviewRow => {
      errors.push({ row: parsed.row, column: 'case_number', message });
      return { row: parsed.row, caseNumber, caseId: null, record: parsed.record, action: null, warnings: [] };
    };
    const earlier = firstRowOf.get(caseNumber);
    if (earlier !== undefined) return fail(`${caseNumber} is already on row ${earlier}; keep one row per case`);
    firstRowOf.set(caseNumber, parsed.row);
    const ref = found.get(caseNumber);
    if (!ref) return fail(`no case ${caseNumber} at ${hospital?.name ?? 'this hospital'}; check the number Plumbline gave the pre-alert`);
    if (ref.state === 'cancelled') return fail(`${caseNumber} was cancelled before arrival, so it has no outcome here`);
    const warnings: string[] = [];
    if (ref.state !== 'closed' && ref.state !== 'arrived') warnings.push(`still ${ref.state} on the board; its activation may not be decided yet`);
    return { row: parsed.row, caseNumber, caseId: ref.id, record: parsed.record, action: ref.hasOutcome ? 'update' : 'new', warnings };
  };
  // Checked with turns of the event loop, as the file was parsed: 20,000 rows in one pass held
  // the server for tens of milliseconds.
  const preview: PreviewRow[] = [];
  for (let i = 0; i < rows.length; i++) {
    if (i % ROWS_PER_TURN === ROWS_PER_TURN - 1) await nextTurn();
    preview.push(check(rows[i]));
  }
  return { preview, errors };
}

export function summarise(fileName: string, hospitalId: number, preview: PreviewRow[], errors: ImportIssue[]): Omit<ImportPreview, 'token' | 'expiresAt'> {
  const sorted = errors.slice().sort((a, b) => a.row - b.row);
  const valid = preview.filter((r) => r.action !== null);
  return {
    fileName,
    hospitalId,
    rows: preview,
    errors: sorted,
    counts: {
      rows: preview.length,
      valid: valid.length,
      new: valid.filter((r) => r.action === 'new').length,
      update: valid.filter((r) => r.action === 'update').length,
      errors: sorted.length,
    },
  };
}

/** The stored row of an outcome, and back: what the report, the audit and the demo read. */
export function outcomeRow(record: OutcomeRecord) {
  const known = NFTI_FIELDS.filter((f) => record[f] !== undefined);
  const row: Record<string, unknown> = {
    iss: record.iss,
    niss: record.niss,
    ais: record.ais ? JSON.stringify(record.ais) : null,
    red_cells_4h: record.redCellsWithin4h,
    nfti_known: JSON.stringify(known),
    nfti_given: record.nftiGiven,
    nfti_positive: record.nftiPositive,
    disposition: record.disposition,
  };
  for (const f of NFTI_FIELDS) row[DB_COLUMN[f]] = record[f] ?? null;
  return row;
}

const bool = (v: unknown) => (v == null ? null : Boolean(v));

export function outcomeFromRow(caseNumber: string, row: Record<string, unknown>): OutcomeRecord {
  const known: string[] = row.nfti_known ? JSON.parse(String(row.nfti_known)) : [];
  const record = {
    caseNumber,
    iss: row.iss == null ? null : Number(row.iss),
    niss: row.niss == null ? null : Number(row.niss),
    ais: row.ais ? JSON.parse(String(row.ais)) : null,
    redCellsWithin4h: bool(row.red_cells_4h),
    nftiGiven: bool(row.nfti_given),
    nftiPositive: bool(row.nfti_positive),
    disposition: (row.disposition as Disposition | null) ?? null,
  } as OutcomeRecord;
  for (const f of NFTI_FIELDS) record[f] = known.includes(f) ? (row[DB_COLUMN[f]] == null ? null : Number(row[DB_COLUMN[f]])) : undefined;
  return record;
}

function outcomeAudit(actor: Actor, caseId: number, record: OutcomeRecord, existing: Record<string, unknown> | undefined, at: number, batch: string) {
  return {
    at, actor, action: existing ? 'outcome.updated' : 'outcome.imported', entity: 'outcome' as const, entityId: caseId, caseId,
    before: existing ? outcomeFromRow(record.caseNumber, existing) : null,
    after: { ...record, batch },
  };
}

/** Writes checked rows in the caller's transaction, one audit row per case (the demo's few rows). */
export async function storeOutcomes(trx: Knex, actor: Actor, rows: Array<{ caseId: number; record: OutcomeRecord }>, at: number, batch: string): Promise<{ created: number; updated: number }> {
  let created = 0;
  let updated = 0;
  for (const { caseId, record } of rows) {
    const existing = await trx('outcomes').where({ case_id: caseId }).first();
    const values = { ...outcomeRow(record), imported_at: at, imported_by: actor.id, batch };
    if (existing) {
      await trx('outcomes').where({ case_id: caseId }).update(values);
      updated++;
    } else {
      await trx('outcomes').insert({ case_id: caseId, ...values });
      created++;
    }
    await appendAudit(trx, outcomeAudit(actor, caseId, record, existing, at, batch));
  }
  return { created, updated };
}

/**
 * Rows staged per transaction: each holds the database for a few milliseconds, as its rows and
 * their audit rows go in one insert each (an insert per audit row held it ten times as long).
 */
const STAGE_CHUNK = 50;
const OUTCOME_COLUMNS_STORED = [
  'iss', 'niss', 'ais', 'red_cells_4h', 'minutes_to_or', 'minutes_to_ir', 'icu_days', 'hours_to_ventilation', 'hours_to_death',
  'nfti_known', 'nfti_given', 'nfti_positive', 'disposition', 'imported_at', 'imported_by',
] as const;
const MOVE_STAGED = `INSERT INTO outcomes (case_id, ${OUTCOME_COLUMNS_STORED.join(', ')}, batch)
  SELECT case_id, ${OUTCOME_COLUMNS_STORED.join(', ')}, batch FROM outcome_staging WHERE batch = ? ORDER BY id
  ON CONFLICT (case_id) DO UPDATE SET ${[...OUTCOME_COLUMNS_STORED, 'batch'].map((c) => `${c} = excluded.${c}`).join(', ')}`;

/**
 * Saves checked rows. Each chunk is staged with its audit rows (what the import does to each
 * case) in its own short transaction; then one statement moves the whole batch into `outcomes`,
 * in the transaction that writes the batch's `outcome.batch-saved` row. Until that commit nobody
 * sees any of it; a batch that fails on the way gets `outcome.batch-abandoned` and changes nothing.
 */
export async function saveStaged(db: Knex, actor: Actor, rows: Array<{ caseId: number; record: OutcomeRecord }>, at: number, batch: string, hospitalId: number): Promise<{ created: number; updated: number }> {
  let created = 0;
  let updated = 0;
  try {
    for (let i = 0; i < rows.length; i += STAGE_CHUNK) {
      const chunk = rows.slice(i, i + STAGE_CHUNK);
      await db.transaction(async (trx) => {
        const existing = new Map<number, Record<string, unknown>>();
        for (const row of await trx('outcomes').whereIn('case_id', chunk.map((r) => r.caseId)).select('*')) existing.set(row.case_id, row);
        await trx('outcome_staging').insert(chunk.map(({ caseId, record }) => ({ batch, case_id: caseId, ...outcomeRow(record), imported_at: at, imported_by: actor.id })));
        await appendAudits(trx, chunk.map(({ caseId, record }) => outcomeAudit(actor, caseId, record, existing.get(caseId), at, batch)));
        for (const { caseId } of chunk) {
          if (existing.has(caseId)) updated++;
          else created++;
        }
      });
      await breathe();
    }
    await db.transaction(async (trx) => {
      await trx.raw(MOVE_STAGED, [batch]);
      await appendAudit(trx, { at, actor, action: 'outcome.batch-saved', entity: 'outcome', entityId: batch, after: { batch, hospitalId, created, updated } });
    });
  } catch (err) {
    await db.transaction((trx) => appendAudit(trx, { at, actor, action: 'outcome.batch-abandoned', entity: 'outcome', entityId: batch, after: { batch, hospitalId, staged: created + updated } })).catch(() => {});
    throw err;
  } finally {
    await clearStaged(db, batch);
  }
  return { created, updated };
}

/** Removes a batch's staged rows a chunk at a time, off the path of pre-alerts. */
async function clearStaged(db: Knex, batch: string): Promise<void> {
  for (;;) {
    const ids = (await db('outcome_staging').where({ batch }).orderBy('id').limit(500).select('id')).map((r) => r.id as number);
    if (!ids.length) return;
    await db('outcome_staging').whereIn('id', ids).del();
    await breathe();
  }
}

/**
 * After a stop in the middle of an import: its staged rows never became outcomes. Records each
 * such batch as abandoned and removes its rows.
 */
export async function abandonStagedImports(db: Knex, at: number): Promise<string[]> {
  const batches = (await db('outcome_staging').distinct('batch')).map((r) => r.batch as string);
  for (const batch of batches) {
    const [{ n }] = await db('outcome_staging').where({ batch }).count({ n: '*' });
    await db.transaction((trx) => appendAudit(trx, { at, actor: systemActor, action: 'outcome.batch-abandoned', entity: 'outcome', entityId: batch, after: { batch, staged: Number(n), reason: 'the server stopped before the import was saved' } }));
    await clearStaged(db, batch);
  }
  return batches;
}
