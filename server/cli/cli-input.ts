import { createInterface } from 'node:readline';
import { parse as parseCsv } from 'csv-parse/sync';
import { CLINICAL_FIELDS } from '../../shared/schemas/clinical';
import { feetToMetres, storeysToMetres } from '../../shared/schemas/units';

// Reading the batch commands' input: flags, lines, JSON, CSV rows, and the fall height's
// alternative units, each refusal naming its field.

export const HEIGHT_ALTERNATIVES = ['fall.heightFt', 'fall.heightStoreys'] as const;
export const LEAF_FIELDS = CLINICAL_FIELDS.filter((f) => !CLINICAL_FIELDS.some((g) => g.startsWith(`${f}.`)));

/** Flags with values; `switches` are flags without one (--csv). */
export function parseFlags(args: string[], known: readonly string[], switches: readonly string[] = []): { flags: Map<string, string>; error?: string } {
  const flags = new Map<string, string>();
  for (let i = 0; i < args.length; i++) {
    const arg = args[i];
    const eq = arg.indexOf('=');
    const name = eq > 0 ? arg.slice(0, eq) : arg;
    if (name === '--help' || name === '-h') {
      flags.set('--help', '');
      continue;
    }
    if (switches.includes(name) && eq < 0) {
      flags.set(name, '');
      continue;
    }
    if (!known.includes(name)) return { flags, error: `unknown argument ${arg}` };
    const value = eq > 0 ? arg.slice(eq + 1) : args[++i];
    if (value === undefined || value === '') return { flags, error: `${name} needs a value` };
    flags.set(name, value);
  }
  return { flags };
}

export async function* lines(stdin: NodeJS.ReadableStream): AsyncGenerator<[number, string]> {
  let n = 0;
  for await (const raw of createInterface({ input: stdin, crlfDelay: Infinity })) {
    n++;
    const line = n === 1 ? raw.replace(/^\uFEFF/, '') : raw;
    if (line.trim() !== '') yield [n, line];
  }
}

export async function readAll(stdin: NodeJS.ReadableStream): Promise<string> {
  let text = '';
  for await (const chunk of stdin) text += typeof chunk === 'string' ? chunk : (chunk as Buffer).toString('utf8');
  return text.replace(/^\uFEFF/, '');
}

export function parseJson(text: string): { value: unknown } | { error: string } {
  try {
    return { value: JSON.parse(text) };
  } catch (error) {
    return { error: `not valid JSON (${(error as Error).message})` };
  }
}

/** A decimal number as typed: digits, one optional point, an optional sign; never hex, exponent or blank. */
export const DECIMAL = /^[+-]?(\d+(\.\d*)?|\.\d+)$/;

export const YES = new Set(['yes', 'true', '1', 'y']);
export const NO = new Set(['no', 'false', '0', 'n']);

export type Refusal = { field: string; message: string };

/** The fall height in feet or storeys, as metres; exactly one of the three units. */
export function metresFromAlternatives(value: unknown): Refusal | null {
  if (typeof value !== 'object' || value === null || Array.isArray(value)) return null;
  const fall = (value as { fall?: unknown }).fall;
  if (typeof fall !== 'object' || fall === null || Array.isArray(fall)) return null;
  const f = fall as Record<string, unknown>;
  const given = ['heightM', 'heightFt', 'heightStoreys'].filter((k) => k in f);
  if (given.length > 1) return { field: 'fall', message: `give the fall height once, in one unit: ${given.map((k) => `fall.${k}`).join(' and ')} both given` };
  for (const [key, toMetres] of [['heightFt', feetToMetres], ['heightStoreys', (v: number) => storeysToMetres(v)]] as const) {
    if (!(key in f)) continue;
    const v = f[key];
    if (typeof v !== 'number' || !Number.isFinite(v)) return { field: `fall.${key}`, message: 'must be a number' };
    delete f[key];
    f.heightM = toMetres(v);
  }
  return null;
}

export const NUMBER_FIELDS = new Set<string>([
  'ageYears', 'pregnancyWeeks', 'weightKg', 'bodyHeightCm', 'fall.heightM', ...HEIGHT_ALTERNATIVES,
  'vitals.sbp', 'vitals.hr', 'vitals.rr', 'vitals.spo2', 'vitals.gcs.eye', 'vitals.gcs.verbal', 'vitals.gcs.motor', 'vitals.gcsTotal',
]);
export const YES_NO_FIELDS = new Set<string>([
  'anticoagulant', 'fall.headImpact', 'vitals.spo2RoomAir', 'vitals.intubated', 'vitals.respiratorySupport', 'vitals.respiratoryDistress',
]);
export const LIST_FIELDS = new Set<string>(['findings', 'considerations']);
export const CSV_FIELDS = new Set<string>([...LEAF_FIELDS, ...HEIGHT_ALTERNATIVES]);

/** One CSV row as the clinical input's object; an empty cell is left out ("not recorded"). */
export function rowToInput(header: readonly string[], row: readonly string[]): { value: Record<string, unknown> } | { refusals: Refusal[] } {
  const value: Record<string, unknown> = {};
  const refusals: Refusal[] = [];
  if (row.length !== header.length) return { refusals: [{ field: '(row)', message: `has ${row.length} cells; the header names ${header.length}` }] };
  header.forEach((field, i) => {
    const cell = row[i].trim();
    if (cell === '') return;
    let typed: unknown = cell;
    if (NUMBER_FIELDS.has(field)) {
      if (!DECIMAL.test(cell)) return refusals.push({ field, message: `must be a decimal number, not "${cell.slice(0, 40)}"` });
      typed = Number(cell);
    } else if (YES_NO_FIELDS.has(field)) {
      const lower = cell.toLowerCase();
      if (YES.has(lower)) typed = true;
      else if (NO.has(lower)) typed = false;
      else return refusals.push({ field, message: 'must be yes or no (true/false, 1/0), or empty when not known' });
    } else if (LIST_FIELDS.has(field)) {
      typed = cell.split(/[\s;]+/).filter(Boolean);
    }
    const path = field.split('.');
    let at = value;
    for (const key of path.slice(0, -1)) at = (at[key] ??= {}) as Record<string, unknown>;
    at[path[path.length - 1]] = typed;
  });
  return refusals.length ? { refusals } : { value };
}

export function detectDelimiter(firstLine: string): string {
  const counts = [',', ';', '\t'].map((d) => [d, firstLine.split(d).length - 1] as const);
  const [best] = counts.sort((x, y) => y[1] - x[1]);
  return best[1] > 0 ? best[0] : ',';
}

/** The rows and the line each starts on. */
export function readCsv(text: string, delimiter?: string): { rows: string[][]; lines: number[]; error?: undefined } | { error: string } {
  const first = text.split(/\r?\n/, 1)[0] ?? '';
  try {
    // The line each row was read on, noted as the parser hands the row over.
    const lines: number[] = [];
    const rows = parseCsv(text, {
      delimiter: delimiter ?? detectDelimiter(first), skip_empty_lines: true, relax_column_count: true, trim: true,
      on_record: (record, context) => {
        lines.push(context.lines);
        return record;
      },
    });
    return { rows, lines };
  } catch (error) {
    return { error: `not valid CSV (${(error as Error).message.split('\n')[0]})` };
  }
}

