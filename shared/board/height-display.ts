import type { FiredCriterion, HeightFact } from '../triage/evaluate';

// Fall heights as people read them, for every screen, page and print (no I/O). The engine keeps
// metres to the micrometre and its own words; here the patient's height is shown to one decimal
// in the reader's unit, and a criterion's figure exactly as published, so that a rounded value
// is never taken for the threshold. Nothing shown here is ever written back.

export type HeightUnit = 'm' | 'ft' | 'storeys';

/** Exact by definition of the international foot (SOURCES.md §8). */
const METRES_PER_FOOT = 0.3048;
/** One storey = 10 feet (SOURCES.md §8), as in shared/schemas/units.ts. */
const METRES_PER_STOREY = 10 * METRES_PER_FOOT;

const oneDecimal = (n: number): string => (Math.round(n * 10) / 10).toFixed(1);
/** Metres as stored, to the micrometre: 10 ft reads 3.048. */
const exactMetres = (m: number): string => String(Math.round(m * 1e6) / 1e6);

/** A patient's fall height to one decimal: "12.0 ft", "3.7 m", "1.2 storeys"; 0 is from standing. */
export function formatHeight(heightM: number, unit: HeightUnit): string {
  if (heightM === 0) return 'from standing';
  if (unit === 'ft') return `${oneDecimal(heightM / METRES_PER_FOOT)} ft`;
  if (unit === 'storeys') {
    const storeys = oneDecimal(heightM / METRES_PER_STOREY);
    return `${storeys} ${storeys === '1.0' ? 'storey' : 'storeys'}`;
  }
  return `${oneDecimal(heightM)} m`;
}

/** The same with the other common unit beside it: "12.0 ft (3.7 m)", "3.7 m (12.0 ft)". */
export function formatHeightBoth(heightM: number, unit: HeightUnit): string {
  if (heightM === 0) return 'from standing';
  return `${formatHeight(heightM, unit)} (${formatHeight(heightM, unit === 'ft' ? 'm' : 'ft')})`;
}

/**
 * A criterion's figure, exact, the reader's unit first where it is exact in it: "10 ft (3.048 m)"
 * for a feet (or storeys) hospital, "3.048 m (10 ft)" for a metres one. A figure published in
 * metres has no exact feet, so it reads "6 m (19.7 ft)" whatever the unit.
 */
export function formatThreshold(thresholdM: number, unit: HeightUnit): string {
  const metres = `${exactMetres(thresholdM)} m`;
  const feet = thresholdM / METRES_PER_FOOT;
  const hundredths = Math.round(feet * 100) / 100;
  if (Math.abs(feet - hundredths) > 1e-9) return `${metres} (${oneDecimal(feet)} ft)`;
  return unit === 'm' ? `${metres} (${hundredths} ft)` : `${hundredths} ft (${metres})`;
}

const RELATION_WORDS: Record<NonNullable<HeightFact['compared']>['relation'], string> = {
  above: 'above',
  'at-most': 'at or below',
  below: 'below',
};

/** One stated height: "fall 12.0 ft (3.7 m), above the 10 ft (3.048 m) threshold". */
export function formatHeightFact(fact: HeightFact, unit: HeightUnit): string {
  const fall = `fall ${formatHeightBoth(fact.heightM, unit)}`;
  if (!fact.compared) return fall;
  return `${fall}, ${RELATION_WORDS[fact.compared.relation]} the ${formatThreshold(fact.compared.thresholdM, unit)} threshold`;
}

const escapeRegExp = (text: string): string => text.replace(/[.*+?^${}()|[\]\\]/g, '\\$&');

/**
 * A met criterion's reasons with each fall height in the reader's unit; the other words are the
 * engine's. A result stored before heights were recorded as numbers reads as it was stored.
 */
export function becauseInUnit(criterion: Pick<FiredCriterion, 'because' | 'heights'>, unit: HeightUnit): string {
  const facts = criterion.heights;
  if (!facts?.length) return criterion.because;
  const byText = new Map(facts.map((fact) => [fact.text, fact]));
  // Longest first, so a comparison is taken whole before a bare height it starts with.
  const texts = [...byText.keys()].filter(Boolean).sort((a, b) => b.length - a.length);
  if (!texts.length) return criterion.because;
  return criterion.because.replace(new RegExp(texts.map(escapeRegExp).join('|'), 'g'), (text) => formatHeightFact(byText.get(text)!, unit));
}
