import { rate, wilsonInterval, type Interval } from './wilson';

/** Which outcome counts as major trauma: ISS > 15, NFTI-positive, or either. */
export type OutcomeStandard = 'iss' | 'nfti' | 'iss-or-nfti';
export const STANDARD_LABEL: Readonly<Record<OutcomeStandard, string>> = {
  iss: 'ISS > 15',
  nfti: 'NFTI-positive',
  'iss-or-nfti': 'ISS > 15 or NFTI-positive',
};

export interface TriageOutcome {
  /** Full (highest-level) activation called. */
  fullActivation: boolean;
  iss: number | null;
  nfti?: boolean | null;
}

// The one Cribari classification (SOURCES.md §7): the report, the drill-down, the what-if and the
// command line all call these; the database only filters and counts.

/** ISS above this is major trauma [sourced: Baker 1974, SOURCES.md §7]. */
export const MAJOR_TRAUMA_ISS_ABOVE = 15;

export const MAJOR = 1;
export const NOT_MAJOR = 0;
export const CANNOT_TELL = -1;
export type MajorCode = typeof MAJOR | typeof NOT_MAJOR | typeof CANNOT_TELL;

/**
 * Major trauma under a standard, as a code: 1 major, 0 not, −1 the outcome cannot tell. `iss`
 * below 0 and `nfti` below 0 mean "not known" (the form columns of numbers carry), as do null and
 * undefined.
 */
export function majorTraumaCode(iss: number | null | undefined, nfti: boolean | number | null | undefined, standard: OutcomeStandard): MajorCode {
  const byIss: MajorCode = iss == null || iss < 0 ? CANNOT_TELL : iss > MAJOR_TRAUMA_ISS_ABOVE ? MAJOR : NOT_MAJOR;
  const byNfti: MajorCode = nfti == null || nfti === -1 ? CANNOT_TELL : nfti === true || nfti === 1 ? MAJOR : NOT_MAJOR;
  if (standard === 'iss') return byIss;
  if (standard === 'nfti') return byNfti;
  if (byIss === MAJOR || byNfti === MAJOR) return MAJOR;
  return byIss === NOT_MAJOR && byNfti === NOT_MAJOR ? NOT_MAJOR : CANNOT_TELL;
}

/** Major trauma under a standard; null when the outcome cannot tell. */
export function isMajorTrauma(iss: number | null | undefined, nfti: boolean | null | undefined, standard: OutcomeStandard): boolean | null {
  const code = majorTraumaCode(iss, nfti, standard);
  return code === CANNOT_TELL ? null : code === MAJOR;
}

export type CribariCell = 'a' | 'b' | 'c' | 'd';
export const CRIBARI_CELLS: readonly CribariCell[] = ['a', 'b', 'c', 'd'];
/** The cell's index (0 a, 1 b, 2 c, 3 d), 4 when the outcome cannot tell. */
export const CELL_CANNOT_TELL = 4;

/** a full activation and major, b full and not, c not full and major, d not full and not; 4 cannot tell. */
export function cribariCellIndex(fullActivation: boolean, major: MajorCode | number): number {
  if (major < 0) return CELL_CANNOT_TELL;
  return fullActivation ? (major ? 0 : 1) : major ? 2 : 3;
}

export interface TriageRates {
  overTriage: number | null;
  underTriage: number | null;
  overTriageCI: Interval | null;
  underTriageCI: Interval | null;
}

export interface CribariResult extends TriageRates {
  standard: OutcomeStandard;
  standardLabel: string;
  /** a full & major, b full & not, c not full & major, d not full & not. */
  a: number;
  b: number;
  c: number;
  d: number;
  /** Rows whose outcome is unknown under the standard; in no cell. */
  excluded: number;
  /** Over-triage b/(b+d) = 1 − specificity, under-triage c/(a+c) = 1 − sensitivity [memory: Peng & Xiang 2016]. */
  sensitivityDefinition: TriageRates & { definition: string };
}

/** Rates from the four cells; Cribari first: over b/(a+b), under c/(c+d) [source: ACS-COT method]. */
export function triageRates(a: number, b: number, c: number, d: number): Omit<CribariResult, 'standard' | 'standardLabel' | 'excluded'> {
  return {
    a, b, c, d,
    overTriage: rate(b, a + b),
    underTriage: rate(c, c + d),
    overTriageCI: wilsonInterval(b, a + b),
    underTriageCI: wilsonInterval(c, c + d),
    sensitivityDefinition: {
      definition: 'under-triage = 1 − sensitivity = c/(a+c); over-triage = 1 − specificity = b/(b+d)',
      overTriage: rate(b, b + d),
      underTriage: rate(c, a + c),
      overTriageCI: wilsonInterval(b, b + d),
      underTriageCI: wilsonInterval(c, a + c),
    },
  };
}

/** One plain pass over the rows: 100,000 rows take a few milliseconds. */
export function cribariMatrix(rows: readonly TriageOutcome[], standard: OutcomeStandard = 'iss'): CribariResult {
  const cells = new Int32Array(5);
  for (let i = 0; i < rows.length; i++) {
    const row = rows[i];
    cells[cribariCellIndex(row.fullActivation, majorTraumaCode(row.iss, row.nfti, standard))]++;
  }
  return { standard, standardLabel: STANDARD_LABEL[standard], excluded: cells[4], ...triageRates(cells[0], cells[1], cells[2], cells[3]) };
}
