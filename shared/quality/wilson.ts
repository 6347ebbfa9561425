/** z for a two-sided 95 % interval. */
export const Z_95 = 1.959963984540054;

export type Interval = [lo: number, hi: number];

/**
 * Wilson score interval for a proportion [source: Wilson EB, J Am Stat Assoc 1927]; it stays
 * inside 0–1 and behaves at 0 and n events, where the normal approximation does not. Null when n = 0.
 */
export function wilsonInterval(events: number, n: number, z: number = Z_95): Interval | null {
  if (n <= 0) return null;
  const p = events / n;
  const z2 = z * z;
  const denominator = 1 + z2 / n;
  const centre = (p + z2 / (2 * n)) / denominator;
  const half = (z * Math.sqrt((p * (1 - p)) / n + z2 / (4 * n * n))) / denominator;
  return [Math.max(0, centre - half), Math.min(1, centre + half)];
}

export function rate(events: number, n: number): number | null {
  return n > 0 ? events / n : null;
}
