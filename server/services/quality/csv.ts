// CSV for people who open it in a spreadsheet. A cell that starts like a formula would run as
// one there (CSV or formula injection), so it gets a leading apostrophe and is read as text.

export interface CsvColumn<T> {
  header: string;
  value: (row: T) => unknown;
}

const FORMULA_START = /^[=+\-@\t\r]/;

/** One cell's text: formula starts neutralised, then quoted when it holds a comma, quote or line break. */
export function csvCell(value: unknown): string {
  if (value === null || value === undefined) return '';
  let text = value instanceof Date ? value.toISOString() : typeof value === 'object' ? JSON.stringify(value) : String(value);
  // A plain negative number is data, not a formula, and stays a number for the spreadsheet.
  if (FORMULA_START.test(text) && !(typeof value === 'number' && Number.isFinite(value))) text = `'${text}`;
  return /[",\r\n]/.test(text) ? `"${text.replace(/"/g, '""')}"` : text;
}

/** RFC 4180 text: a header line, one line per row, CRLF line ends. */
export function toCsv<T>(rows: Iterable<T>, columns: ReadonlyArray<CsvColumn<T>>): string {
  const lines = [columns.map((c) => csvCell(c.header)).join(',')];
  for (const row of rows) lines.push(columns.map((c) => csvCell(c.value(row))).join(','));
  return lines.join('\r\n') + '\r\n';
}
