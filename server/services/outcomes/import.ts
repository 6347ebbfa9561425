import { randomBytes } from 'node:crypto';
import { parse as parseCsv } from 'csv-parse';
import type { Knex } from 'knex';
import type { Me } from '../../../shared/roles';
import { injuryScores, nftiPositive, type NftiComponents } from '../../../shared/quality';
import { ISS_REGIONS, type IssRegion } from '../../../shared/quality/iss';
import {
  AIS_COLUMNS, DISPOSITIONS, OUTCOME_COLUMNS, OUTCOME_COLUMN_NAMES, OUTCOME_FILE_MAX_ROWS,
  type Disposition, type ImportIssue, type ImportPreview, type ImportResult, type OutcomeRecord, type PreviewRow,
} from '../../../shared/schemas/quality';
import { assertHospital, assertMay, roleFor } from '../../auth/guards';
import { AppError, notFound } from '../../errors';
import { appendAudit, appendAudits, systemActor, type Actor } from '../audit/audit';
import { csvCell } from '../quality/csv';

// The registry's outcomes come in as a CSV, are checked row by row and shown whole before
// anything is kept. The save is staged in short transactions, which let pre-alerts through
// between them, and then made visible by one statement, so a file is either all in or not at all.

export interface UploadedFile { originalname: string; buffer: Buffer }

const NFTI_FIELDS = ['minutesToOperatingRoom', 'minutesToInterventionalRadiology', 'icuDays', 'hoursToVentilation', 'hoursToDeath'] as const;
type NftiTimeField = (typeof NFTI_FIELDS)[number];
const NFTI_COLUMN: Record<NftiTimeField, string> = {
  minutesToOperatingRoom: 'minutes_to_or',
  minutesToInterventionalRadiology: 'minutes_to_ir',
  icuDays: 'icu_days',
  hoursToVentilation: 'hours_to_ventilation',
  hoursToDeath: 'hours_to_death',
};
const DB_COLUMN: Record<NftiTimeField, string> = {
  minutesToOperatingRoom: 'minutes_to_or',
  minutesToInterventionalRadiology: 'minutes_to_ir',
  icuDays: 'icu_days',
  hoursToVentilation: 'hours_to_ventilation',
  hoursToDeath: 'hours_to_death',
};

/**
 * The values an ISS can take: 0, 75, or a sum of at most three squares of AIS 1–5
 * [source: Baker 1974]. 7, 15, 23… cannot come from any injuries, so they are typing slips.
 */
const POSSIBLE_ISS: ReadonlySet<number> = (() => {
  const squares = [0, 1, 4, 9, 16, 25];
  const out = new Set<number>([75]);
  for (const a of squares) for (const b of squares) for (const c of squares) out.add(a + b + c);
  return out;
})();

const YES = new Set(['yes', 'y', 'true', '1']);
const NO = new Set(['no', 'n', 'false', '0']);
const NOT_HAPPENED = new Set(['none', 'no', 'never', '-']);

const nextTurn = () => new Promise<void>((resolve) => setImmediate(resolve));
/**
 * The pause between two writes of an import. A turn alone (setImmediate) lets one socket read
 * through, but a pre-alert takes several turns (read, checks, queries, fan-out, answer), and each
 * would wait for another chunk of the import; a busy process also waits longer for a core on a
 * loaded machine. A short sleep lets the server answer what is waiting before the import goes on.
 */
const IMPORT_PAUSE_MS = 2;
const breathe = () => new Promise<void>((resolve) => setTimeout(resolve, IMPORT_PAUSE_MS));

const normaliseHeader = (h: string) => h.trim().toLowerCase().replace(/[\s-]+/g, '_');

/** The template offered for download: the header, one worked example row, nothing else. */
export function outcomeTemplateCsv(): string {
  // Through the same cell writer as every export, so no later example can become a formula.
  const header = OUTCOME_COLUMN_NAMES.map(csvCell).join(',');
  const example = OUTCOME_COLUMNS.map((c) => csvCell(c.example)).join(',');
  return `${header}\r\n${example}\r\n`;
}

interface ParsedRow { row: number; caseNumber: string; record: OutcomeRecord | null; issues: ImportIssue[] }

function parseYesNo(value: string, column: string, row: number, issues: ImportIssue[]): boolean | null {
  if (value === '') return null;
  const v = value.toLowerCase();
  if (YES.has(v)) return true;
  if (NO.has(v)) return false;
  issues.push({ row, column, message: `"${value}" must be yes or no (or empty when not recorded)` });
  return null;
}

function parseScore(value: string, column: string, row: number, issues: ImportIssue[]): number | null {
  if (value === '') return null;
  const n = Number(value);
  if (!/^\d+$/.test(value) || !Number.isInteger(n)) {
    issues.push({ row, column, message: `"${value}" must be a whole number from 0 to 75` });
    return null;
  }
  if (n > 75) {
    issues.push({ row, column, message: `${n} is above 75, the highest score there is` });
    return null;
  }
  if (!POSSIBLE_ISS.has(n)) {
    issues.push({ row, column, message: `${n} cannot be a score: it is not a sum of three AIS squares (check for a typing slip)` });
    return null;
  }
  return n;
}

/** A time or day count: a number, "none" when it did not happen, empty when not recorded. */
function parseAmount(value: string, column: string, row: number, issues: ImportIssue[]): number | null | undefined {
  if (value === '') return undefined;
  if (NOT_HAPPENED.has(value.toLowerCase())) return null;
  const n = Number(value.replace(',', '.'));
  if (!Number.isFinite(n) || !/^\d+([.,]\d+)?$/.test(value)) {
    issues.push({ row, column, message: `"${value}" must be a number, "none" when it did not happen, or empty when not recorded` });
    return undefined;
  }
  return n;
}

function parseAis(value: string, region: IssRegion, row: number, issues: ImportIssue[]): number[] {
  if (value === '') return [];
  const column = AIS_COLUMNS[region];
  const out: number[] = [];
  for (const token of value.split(/[\s,;/]+/).filter(Boolean)) {
    const n = Number(token);
    if (!/^\d$/.test(token)) issues.push({ row, column, message: `"${token}" must be an AIS severity from 1 to 6` });
    else if (n === 9) issues.push({ row, column, message: 'AIS 9 (severity not known) cannot be scored; the registry must resolve it first' });
    else if (n < 1 || n > 6) issues.push({ row, column, message: `${n} must be an AIS severity from 1 to 6` });
    else out.push(n);
  }
  return out;
}

function parseDisposition(value: string, row: number, issues: ImportIssue[]): Disposition | null {
  if (value === '') return null;
  const v = value.trim().toLowerCase().replace(/[\s_]+/g, '-');
  if ((DISPOSITIONS as readonly string[]).includes(v)) return v as Disposition;
  issues.push({ row, column: 'disposition', message: `"${value}" must be one of: ${DISPOSITIONS.join(', ')}` });
  return null;
}

/** One data row to a record, or the row's problems. Pure: no database. */
export function parseOutcomeRow(cells: Record<string, string>, row: number): ParsedRow {
  const issues: ImportIssue[] = [];
  const cell = (name: string) => (cells[name] ?? '').trim();
  const caseNumber = cell('case_number').toUpperCase();
  if (caseNumber === '') issues.push({ row, column: 'case_number', message: 'is empty; every row needs the case number Plumbline gave the pre-alert' });

  const issGiven = parseScore(cell('iss'), 'iss', row, issues);
  const nissGiven = parseScore(cell('niss'), 'niss', row, issues);
  const injuries: Array<{ region: IssRegion; ais: number }> = [];
  for (const region of ISS_REGIONS) for (const ais of parseAis(cell(AIS_COLUMNS[region]), region, row, issues)) injuries.push({ region, ais });
  let iss = issGiven;
  let niss = nissGiven;
  if (injuries.length) {
    const scored = injuryScores(injuries);
    if (issGiven != null && issGiven !== scored.iss) issues.push({ row, column: 'iss', message: `${issGiven} does not match the AIS columns, which give ISS ${scored.iss}` });
    if (nissGiven != null && nissGiven !== scored.niss) issues.push({ row, column: 'niss', message: `${nissGiven} does not match the AIS columns, which give NISS ${scored.niss}` });
    iss = scored.iss;
    niss = scored.niss;
  } else if (issGiven != null && nissGiven != null && nissGiven < issGiven) {
    // NISS takes the three worst injuries anywhere, so it is never below the ISS [source: Osler 1997].
    issues.push({ row, column: 'niss', message: `${nissGiven} is below the ISS ${issGiven}; NISS is never lower than ISS` });
  }

  const redCellsWithin4h = parseYesNo(cell('red_cells_4h'), 'red_cells_4h', row, issues);
  const times = {} as Record<NftiTimeField, number | null | undefined>;
  for (const field of NFTI_FIELDS) times[field] = parseAmount(cell(NFTI_COLUMN[field]), NFTI_COLUMN[field], row, issues);
  const nftiGiven = parseYesNo(cell('nfti'), 'nfti', row, issues);
  const components: NftiComponents = { redCellsWithin4h };
  for (const field of NFTI_FIELDS) if (times[field] !== undefined) components[field] = times[field];
  const anyComponent = redCellsWithin4h != null || NFTI_FIELDS.some((f) => times[f] !== undefined);
  const computed = anyComponent ? nftiPositive(components) : null;
  if (computed === true && nftiGiven === false) issues.push({ row, column: 'nfti', message: 'says no, but the NFTI fields of this row meet the definition' });
  if (computed === false && nftiGiven === true) issues.push({ row, column: 'nfti', message: 'says yes, but every NFTI field of this row is recorded and none meets the definition' });
  const disposition = parseDisposition(cell('disposition'), row, issues);

  if (caseNumber !== '' && iss == null && computed == null && nftiGiven == null && !issues.length) {
    issues.push({ row, column: null, message: 'has no ISS, no AIS injuries and no NFTI; there is no outcome to import' });
  }
  if (issues.length) return { row, caseNumber, record: null, issues };
  return {
    row,
    caseNumber,
    issues,
    record: {
      caseNumber, iss, niss, ais: injuries.length ? injuries : null, redCellsWithin4h,
      ...times, nftiGiven, nftiPositive: computed ?? nftiGiven, disposition,
    },
  };
}

/**
 * CSV text to records, fed to the parser a slice at a time with a turn of the event loop between
 * slices: a 20,000-row file parsed in one call held up every pre-alert for half a second.
 */
async function readCsv(text: string, delimiter: string): Promise<string[][]> {
  const parser = parseCsv({ bom: true, delimiter, relax_column_count: true, trim: true, skip_empty_lines: false });
  const records: string[][] = [];
  let failure: Error | null = null;
  parser.on('readable', () => {
    let record: string[] | null;
    while ((record = parser.read() as string[] | null) !== null) records.push(record);
  });
  const ended = new Promise<void>((resolve) => {
    parser.once('end', resolve);
    parser.once('error', (err: Error) => {
      failure = err;
      resolve();
    });
  });
  for (let i = 0; i < text.length && !failure; i += CSV_SLICE) {
    parser.write(text.slice(i, i + CSV_SLICE));
    await nextTurn();
  }
  if (!failure) parser.end();
  await ended;
  if (failure) throw failure;
  return records;
}

const CSV_SLICE = 4096;
/** Rows checked between turns of the event loop. */
const ROWS_PER_TURN = 200;

/** The whole file to rows, or file-level problems (not a CSV, unknown columns, too many rows). */
export async function parseOutcomeCsv(buffer: Buffer): Promise<{ rows: ParsedRow[]; fileIssues: ImportIssue[] }> {
  const text = buffer.toString('utf8');
  if (text.includes('\u0000')) return { rows: [], fileIssues: [{ row: 1, column: null, message: 'The file is not text; export the registry data as CSV' }] };
  const firstLine = text.replace(/^\ufeff/, '').split(/\r?\n/, 1)[0] ?? '';
  // Spreadsheets in many locales save CSV with semicolons; the header tells which it is.
  const delimiter = !firstLine.includes(',') && firstLine.includes(';') ? ';' : ',';
  let records: string[][];
  try {
    records = await readCsv(text, delimiter);
  } catch (err) {
    const line = (err as { lines?: number }).lines;
    return { rows: [], fileIssues: [{ row: typeof line === 'number' ? line : 1, column: null, message: `The file cannot be read as CSV: ${(err as Error).message}` }] };
  }
  const [header, ...body] = records;
  if (!header || header.every((h) => h.trim() === '')) return { rows: [], fileIssues: [{ row: 1, column: null, message: 'The file is empty; it needs a header row and one row per case' }] };
  const names = header.map(normaliseHeader);
  const fileIssues: ImportIssue[] = [];
  const seen = new Set<string>();
  names.forEach((name) => {
    if (name === '') fileIssues.push({ row: 1, column: null, message: 'A column has no name in the header row' });
    else if (!OUTCOME_COLUMN_NAMES.includes(name)) fileIssues.push({ row: 1, column: name, message: `is not a column we know; the columns are: ${OUTCOME_COLUMN_NAMES.join(', ')}` });
    else if (seen.has(name)) fileIssues.push({ row: 1, column: name, message: 'appears twice in the header row' });
    seen.add(name);
  });
  if (!seen.has('case_number')) fileIssues.push({ row: 1, column: 'case_number', message: 'is missing from the header row; every file needs it' });
  const dataRows = body.filter((cells) => cells.some((c) => c !== ''));
  if (dataRows.length > OUTCOME_FILE_MAX_ROWS) fileIssues.push({ row: 1, column: null, message: `The file has ${dataRows.length} rows; at most ${OUTCOME_FILE_MAX_ROWS} fit in one import, so split it by month` });
  if (!dataRows.length && !fileIssues.length) fileIssues.push({ row: 2, column: null, message: 'The file has a header but no rows' });
  if (fileIssues.length) return { rows: [], fileIssues };

  const rows: ParsedRow[] = [];
  for (let i = 0; i < body.length; i++) {
    if (i % ROWS_PER_TURN === ROWS_PER_TURN - 1) await nextTurn();
    const cells = body[i];
    if (!cells.some((c) => c !== '')) continue;
    const row = i + 2; // spreadsheet numbering, the header being row 1
    if (cells.length > names.length) {
      rows.push({ row, caseNumber: (cells[names.indexOf('case_number')] ?? '').trim().toUpperCase(), record: null, issues: [{ row, column: null, message: `has ${cells.length} cells but the header has ${names.length} columns` }] });
      continue;
    }
    const byName: Record<string, string> = {};
    names.forEach((name, c) => (byName[name] = cells[c] ?? ''));
    rows.push(parseOutcomeRow(byName, row));
  }
  return { rows, fileIssues };
}

interface CaseRef { id: number; state: string; hasOutcome: boolean }

/** Looks every case number up at this hospital; unknown, cancelled and repeated numbers are row errors. */
async function resolveCases(db: Knex, hospitalId: number, rows: ParsedRow[]): Promise<{ preview: PreviewRow[]; errors: ImportIssue[] }> {
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

function summarise(fileName: string, hospitalId: number, preview: PreviewRow[], errors: ImportIssue[]): Omit<ImportPreview, 'token' | 'expiresAt'> {
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

// ---- Previews kept for the confirm step ---------------------------------------------------------

interface HeldPreview { userId: number; hospitalId: number; fileName: string; buffer: Buffer; expiresAt: number }
const PREVIEW_TTL_MS = 15 * 60_000;
const MAX_HELD = 100;
const held = new Map<string, HeldPreview>();

function hold(entry: HeldPreview, at: number): string {
  for (const [token, h] of held) if (h.expiresAt <= at) held.delete(token);
  while (held.size >= MAX_HELD) held.delete(held.keys().next().value!);
  const token = randomBytes(18).toString('base64url');
  held.set(token, entry);
  return token;
}

function importer(me: Me): Actor {
  return { id: me.user.id, role: roleFor(me, 'quality.manage') };
}

/** Checks the file and answers every problem; stores nothing but the file, for the confirm. */
export async function previewOutcomes(db: Knex, me: Me, hospitalId: number, file: UploadedFile, at: number): Promise<ImportPreview> {
  assertMay(me, 'quality.manage');
  assertHospital(me, hospitalId);
  const { rows, fileIssues } = await parseOutcomeCsv(file.buffer);
  if (fileIssues.length) return { token: null, expiresAt: null, ...summarise(file.originalname, hospitalId, [], fileIssues) };
  const { preview, errors } = await resolveCases(db, hospitalId, rows);
  const summary = summarise(file.originalname, hospitalId, preview, errors);
  if (errors.length) return { token: null, expiresAt: null, ...summary };
  const expiresAt = at + PREVIEW_TTL_MS;
  const token = hold({ userId: me.user.id, hospitalId, fileName: file.originalname, buffer: file.buffer, expiresAt }, at);
  return { token, expiresAt, ...summary };
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


// One import per hospital at a time, so what a staged row says it replaces is still there at the move.
const importing = new Set<number>();

/**
 * Saves checked rows. Each chunk is staged with its audit rows (what the import does to each
 * case) in its own short transaction; then one statement moves the whole batch into `outcomes`,
 * in the transaction that writes the batch's `outcome.batch-saved` row. Until that commit nobody
 * sees any of it; a batch that fails on the way gets `outcome.batch-abandoned` and changes nothing.
 */
async function saveStaged(db: Knex, actor: Actor, rows: Array<{ caseId: number; record: OutcomeRecord }>, at: number, batch: string, hospitalId: number): Promise<{ created: number; updated: number }> {
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

/**
 * Saves a previewed file (by its token) or a file sent again. Everything is checked again
 * before saving; one bad row and nothing is saved.
 */
export async function importOutcomes(db: Knex, me: Me, hospitalId: number, source: { token: string } | { file: UploadedFile }, at: number): Promise<ImportResult> {
  assertMay(me, 'quality.manage');
  assertHospital(me, hospitalId);
  let file: UploadedFile;
  if ('token' in source) {
    const entry = held.get(source.token);
    if (!entry || entry.expiresAt <= at) {
      held.delete(source.token);
      throw new AppError(409, 'preview_expired', 'That preview has expired or was already saved; check the file again.');
    }
    if (entry.userId !== me.user.id || entry.hospitalId !== hospitalId) throw notFound('That preview');
    file = { originalname: entry.fileName, buffer: entry.buffer };
  } else {
    file = source.file;
  }
  if (importing.has(hospitalId)) throw new AppError(409, 'import_running', 'Another outcomes import for this hospital is being saved; try again when it has finished.');
  importing.add(hospitalId);
  try {
    const { rows, fileIssues } = await parseOutcomeCsv(file.buffer);
    if (fileIssues.length) throw rowErrors(fileIssues);
    const batch = `imp-${at.toString(36)}-${randomBytes(3).toString('hex')}`;
    const { preview, errors } = await resolveCases(db, hospitalId, rows);
    if (errors.length) throw rowErrors(errors);
    const good = preview.map((r) => ({ caseId: r.caseId!, record: r.record! }));
    const result = await saveStaged(db, importer(me), good, at, batch, hospitalId);
    if ('token' in source) held.delete(source.token);
    return { batch, saved: result.created + result.updated, ...result };
  } finally {
    importing.delete(hospitalId);
  }
}

function rowErrors(errors: ImportIssue[]): AppError {
  const sorted = errors.slice().sort((a, b) => a.row - b.row);
  const first = sorted[0];
  const where = (e: ImportIssue) => `row ${e.row}${e.column ? `, ${e.column}` : ''}`;
  return new AppError(
    400,
    'invalid_rows',
    `Nothing was saved: ${sorted.length} problem${sorted.length === 1 ? '' : 's'} in the file, the first at ${where(first)}: ${first.message}`,
    sorted.map((e) => ({ field: where(e), message: e.message })),
  );
}
