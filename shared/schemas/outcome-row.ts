import { z } from 'zod';
import { injuryScores, nftiPositive, type NftiComponents } from '../quality';
import { ISS_REGIONS, type IssRegion } from '../quality/iss';
import { AIS_COLUMNS, DISPOSITIONS, type Disposition, type ImportIssue, type OutcomeRecord } from './quality';

// One data row of the registry's outcome CSV, by column name, checked by one schema: each cell's
// own check, then the checks across cells (the ISS against the AIS columns, the NFTI answer
// against its fields). A problem names its column (the issue's path) and says what the cell
// holds; every problem of a row is reported, not only the first, so a cell's check never stops
// the others (issues are added with `continue`).

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

type Ctx = z.RefinementCtx;
const problem = (ctx: Ctx, message: string, path: string[] = []) => ctx.addIssue({ code: 'custom', message, path, continue: true });

/** A cell as text, trimmed; a column the file does not have reads as empty. */
const text = z.string().optional().transform((v) => (v ?? '').trim());

const yesNo = text.transform((v, ctx): boolean | null => {
  if (v === '') return null;
  const lower = v.toLowerCase();
  if (YES.has(lower)) return true;
  if (NO.has(lower)) return false;
  problem(ctx, `"${v}" must be yes or no (or empty when not recorded)`);
  return null;
});

const score = text.transform((v, ctx): number | null => {
  if (v === '') return null;
  if (!/^\d+$/.test(v)) {
    problem(ctx, `"${v}" must be a whole number from 0 to 75`);
    return null;
  }
  const n = Number(v);
  if (n > 75) problem(ctx, `${n} is above 75, the highest score there is`);
  else if (!POSSIBLE_ISS.has(n)) problem(ctx, `${n} cannot be a score: it is not a sum of three AIS squares (check for a typing slip)`);
  else return n;
  return null;
});

/** A time or day count: a number, "none" when it did not happen, undefined (empty) when not recorded. */
const amount = text.transform((v, ctx): number | null | undefined => {
  if (v === '') return undefined;
  if (NOT_HAPPENED.has(v.toLowerCase())) return null;
  const n = Number(v.replace(',', '.'));
  if (!Number.isFinite(n) || !/^\d+([.,]\d+)?$/.test(v)) {
    problem(ctx, `"${v}" must be a number, "none" when it did not happen, or empty when not recorded`);
    return undefined;
  }
  return n;
});

/** The AIS severities of one region's injuries, separated by spaces (or , ; /). */
const severities = text.transform((v, ctx): number[] => {
  const out: number[] = [];
  for (const token of v.split(/[\s,;/]+/).filter(Boolean)) {
    const n = Number(token);
    if (!/^\d$/.test(token)) problem(ctx, `"${token}" must be an AIS severity from 1 to 6`);
    else if (n === 9) problem(ctx, 'AIS 9 (severity not known) cannot be scored; the registry must resolve it first');
    else if (n < 1 || n > 6) problem(ctx, `${n} must be an AIS severity from 1 to 6`);
    else out.push(n);
  }
  return out;
});

const disposition = text.transform((v, ctx): Disposition | null => {
  if (v === '') return null;
  const id = v.toLowerCase().replace(/[\s_]+/g, '-');
  if ((DISPOSITIONS as readonly string[]).includes(id)) return id as Disposition;
  problem(ctx, `"${v}" must be one of: ${DISPOSITIONS.join(', ')}`);
  return null;
});

const caseNumber = text.transform((v, ctx) => {
  if (v === '') problem(ctx, "is empty; every row needs the case number Plumbline gave the pre-alert");
  return v.toUpperCase();
});

const NFTI_TIMES = {
  minutes_to_or: 'minutesToOperatingRoom',
  minutes_to_ir: 'minutesToInterventionalRadiology',
  icu_days: 'icuDays',
  hours_to_ventilation: 'hoursToVentilation',
  hours_to_death: 'hoursToDeath',
} as const;

const OutcomeCells = z.object({
  case_number: caseNumber,
  iss: score,
  niss: score,
  ...(Object.fromEntries(ISS_REGIONS.map((region) => [AIS_COLUMNS[region], severities])) as Record<string, typeof severities>),
  red_cells_4h: yesNo,
  minutes_to_or: amount,
  minutes_to_ir: amount,
  icu_days: amount,
  hours_to_ventilation: amount,
  hours_to_death: amount,
  nfti: yesNo,
  disposition,
});
type OutcomeCells = z.output<typeof OutcomeCells>;
type NftiTimeField = (typeof NFTI_TIMES)[keyof typeof NFTI_TIMES];

/** What the cells say together: the injuries and their scores, the NFTI fields and their verdict. */
function readTogether(row: OutcomeCells) {
  const injuries: Array<{ region: IssRegion; ais: number }> = [];
  // The AIS columns are named from the regions, so the type knows them only as strings.
  const cells = row as Record<string, unknown>;
  for (const region of ISS_REGIONS) for (const ais of cells[AIS_COLUMNS[region]] as number[]) injuries.push({ region, ais });
  const scored = injuries.length ? injuryScores(injuries) : null;
  const times = {} as Record<NftiTimeField, number | null | undefined>;
  const components: NftiComponents = { redCellsWithin4h: row.red_cells_4h };
  let anyComponent = row.red_cells_4h != null;
  for (const [column, field] of Object.entries(NFTI_TIMES) as Array<[keyof typeof NFTI_TIMES, NftiTimeField]>) {
    times[field] = row[column];
    if (row[column] !== undefined) {
      components[field] = row[column];
      anyComponent = true;
    }
  }
  return { injuries, scored, times, computed: anyComponent ? nftiPositive(components) : null };
}

/** One CSV data row, by column name (the header's names, normalised), to the record it holds. */
export const OutcomeCsvRow = OutcomeCells
  .superRefine((row, ctx) => {
    const { scored, computed } = readTogether(row);
    if (scored) {
      if (row.iss != null && row.iss !== scored.iss) problem(ctx, `${row.iss} does not match the AIS columns, which give ISS ${scored.iss}`, ['iss']);
      if (row.niss != null && row.niss !== scored.niss) problem(ctx, `${row.niss} does not match the AIS columns, which give NISS ${scored.niss}`, ['niss']);
    } else if (row.iss != null && row.niss != null && row.niss < row.iss) {
      // NISS takes the three worst injuries anywhere, so it is never below the ISS [source: Osler 1997].
      problem(ctx, `${row.niss} is below the ISS ${row.iss}; NISS is never lower than ISS`, ['niss']);
    }
    if (computed === true && row.nfti === false) problem(ctx, 'says no, but the NFTI fields of this row meet the definition', ['nfti']);
    if (computed === false && row.nfti === true) problem(ctx, 'says yes, but every NFTI field of this row is recorded and none meets the definition', ['nfti']);
    const iss = scored ? scored.iss : row.iss;
    if (row.case_number !== '' && iss == null && computed == null && row.nfti == null && !ctx.issues.length) {
      problem(ctx, 'has no ISS, no AIS injuries and no NFTI; there is no outcome to import');
    }
  })
  .transform((row): OutcomeRecord => {
    const { injuries, scored, times, computed } = readTogether(row);
    return {
      caseNumber: row.case_number, iss: scored ? scored.iss : row.iss, niss: scored ? scored.niss : row.niss, ais: scored ? injuries : null,
      redCellsWithin4h: row.red_cells_4h, ...times, nftiGiven: row.nfti, nftiPositive: computed ?? row.nfti, disposition: row.disposition,
    };
  });

/** One row's outcome, or its problems named by spreadsheet row (the header is row 1) and column. */
export function checkOutcomeRow(cells: Record<string, string>, row: number): { record: OutcomeRecord; issues: [] } | { record: null; issues: ImportIssue[] } {
  const parsed = OutcomeCsvRow.safeParse(cells);
  if (parsed.success) return { record: parsed.data, issues: [] };
  return { record: null, issues: parsed.error.issues.map((i) => ({ row, column: i.path.length ? String(i.path[0]) : null, message: i.message })) };
}
