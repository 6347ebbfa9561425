import { parse as parseCsv } from 'csv-parse';
import { checkOutcomeRow } from '../../../shared/schemas/outcome-row';
import { OUTCOME_COLUMNS, OUTCOME_COLUMN_NAMES, OUTCOME_FILE_MAX_ROWS, type ImportIssue, type OutcomeRecord } from '../../../shared/schemas/quality';
import { csvCell } from '../quality/csv';

// The registry's outcome CSV read into rows: the file's own checks (text, header, size) here,
// each row's by the schema in shared/schemas/outcome-row.ts. No database: matching the rows to
// cases and saving them is store.ts.

export const nextTurn = () => new Promise<void>((resolve) => setImmediate(resolve));

const normaliseHeader = (h: string) => h.trim().toLowerCase().replace(/[\s-]+/g, '_');

/** The template offered for download: the header, one worked example row, nothing else. */
export function outcomeTemplateCsv(): string {
  // Through the same cell writer as every export, so no later example can become a formula.
  const header = OUTCOME_COLUMN_NAMES.map(csvCell).join(',');
  const example = OUTCOME_COLUMNS.map((c) => csvCell(c.example)).join(',');
  return `${header}\r\n${example}\r\n`;
}

export interface ParsedRow { row: number; caseNumber: string; record: OutcomeRecord | null; issues: ImportIssue[] }

/** One data row to a record, or the row's problems. Pure: no database. */
export function parseOutcomeRow(cells: Record<string, string>, row: number): ParsedRow {
  const { record, issues } = checkOutcomeRow(cells, row);
  return { row, caseNumber: (cells.case_number ?? '').trim().toUpperCase(), record, issues };
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
/**
 * Rows checked between turns of the event loop: the row schema takes about 25 µs a row on a
 * loaded machine, so 50 rows hold a pre-alert up for about a millisecond.
 */
const ROWS_PER_TURN = 50;

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
