// The words of the engine's explanations: numbers put into text from tables, fall heights in
// metres and feet, ages, and the texts kept per value so that most explanations are a lookup.
// Used by compile-criteria.ts, the one evaluator.

/**
 * A fall height an explanation states, as numbers, so that a screen can show it in its own unit
 * (shared/board/height-display.ts) while `because` keeps the engine's words.
 */
export interface HeightFact {
  /** The words of the explanation this stands for: "fall 3.658 m (12 ft) > 3.048 m (10 ft)". */
  text: string;
  heightM: number;
  /** The criterion's own figure it was compared with; absent when compared with something else (a child's height). */
  compared?: { relation: 'above' | 'below' | 'at-most'; thresholdM: number };
}

// Whole numbers are most recorded values; a table spares a number-to-text conversion per explanation.
const WHOLE = Array.from({ length: 1001 }, (_, i) => String(i));
// Rounded tenths and thousandths (heights, feet) are put together from tables too. The text is the
// same as String(r / p): below 1001 a decimal with at most three places is the shortest text that
// reads back to its double.
const fractionTexts = (p: number, places: number): string[] =>
  Array.from({ length: p }, (_, i) => (i === 0 ? '' : '.' + String(i).padStart(places, '0').replace(/0+$/, '')));
const FRACTION: Record<number, string[]> = { 10: fractionTexts(10, 1), 1000: fractionTexts(1000, 3) };
export const fmt = (n: number, digits = 1): string => {
  if ((n | 0) === n && n >= 0 && n <= 1000) return WHOLE[n];
  const p = digits === 1 ? 10 : 10 ** digits;
  const r = Math.round(n * p);
  const fraction = FRACTION[p];
  if (fraction !== undefined && r >= 0 && r <= 1000 * p) {
    const whole = Math.floor(r / p);
    return WHOLE[whole] + fraction[r - whole * p];
  }
  return String(r / p);
};

/**
 * A fall height in metres and feet, with places enough not to read the same as the threshold it
 * is compared with: "fall 6.1 m (20.01 ft) > 6.096 m (20 ft)", not "(20 ft) > (20 ft)" [ours].
 */
export function heightText(v: number, threshold?: number): string {
  if (v === 0) return 'fall from standing (0 m)';
  let m = 3, ft = 1;
  if (threshold !== undefined && v !== threshold) {
    while (m < 6 && fmt(v, m) === fmt(threshold, m)) m++;
    while (ft < 4 && fmt(v / 0.3048, ft) === fmt(threshold / 0.3048, ft)) ft++;
  }
  return `fall ${fmt(v, m)} m (${fmt(v / 0.3048, ft)} ft)`;
}

/**
 * Texts that depend on one number, made once per value and kept in 256 slots: recorded values
 * repeat (whole vitals, heights in tenths of a metre or whole feet, whole years), so most
 * explanations are a lookup. A slot holds the last value that fell in it and is matched exactly
 * (Object.is, so that −0 and +0 keep their own texts).
 */
export function textsByValue(make: (v: number) => string): (v: number) => string {
  return keptByValue(make, '');
}

/** textsByValue for any value made from one number; `blank` fills the empty slots. */
export function keptByValue<T>(make: (v: number) => T, blank: T): (v: number) => T {
  const values = new Float64Array(256).fill(NaN);
  const texts: T[] = new Array<T>(256).fill(blank);
  return (v) => {
    // 21 is odd, so 256 whole numbers in a row take 256 different slots, and tenths spread too.
    const k = (v * 21) & 255;
    if (!Object.is(values[k], v)) {
      values[k] = v;
      texts[k] = make(v);
    }
    return texts[k];
  };
}

export function ageText(ageYears: number): string {
  if (ageYears < 2 && !Number.isInteger(ageYears)) return `age ${Math.round(ageYears * 12)} months`;
  return `age ${fmt(ageYears)}`;
}
