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

/** Major trauma under a standard; null when the outcome cannot tell. ISS > 15 [source: Baker 1974, SOURCES.md §7]. */
export function isMajorTrauma(iss: number | null | undefined, nfti: boolean | null | undefined, standard: OutcomeStandard): boolean | null {
  const byIss = iss == null ? null : iss > 15;
  const byNfti = nfti ?? null;
  if (standard === 'iss') return byIss;
  if (standard === 'nfti') return byNfti;
  if (byIss === true || byNfti === true) return true;
  return byIss === false && byNfti === false ? false : null;
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
  let a = 0, b = 0, c = 0, d = 0, excluded = 0;
  const useIss = standard !== 'nfti';
  const useNfti = standard !== 'iss';
  for (let i = 0; i < rows.length; i++) {
    const row = rows[i];
    const iss = useIss ? row.iss : null;
    const nfti = useNfti ? row.nfti : null;
    let major: boolean;
    if ((iss != null && iss > 15) || nfti === true) major = true;
    else if ((!useIss || iss != null) && (!useNfti || nfti === false)) major = false;
    else {
      excluded++;
      continue;
    }
    if (row.fullActivation) major ? a++ : b++;
    else major ? c++ : d++;
  }
  return { standard, standardLabel: STANDARD_LABEL[standard], excluded, ...triageRates(a, b, c, d) };
}
