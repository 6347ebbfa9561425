import { z } from 'zod';

// ISS, Baker SP et al., J Trauma 1974;14(3):187–196 [source]; NISS, Osler T et al., J Trauma 1997;43(6):922 [source].

export const ISS_REGIONS = ['head-neck', 'face', 'chest', 'abdomen', 'extremities', 'external'] as const;
export type IssRegion = (typeof ISS_REGIONS)[number];

export const AisInjury = z.object({
  region: z.enum(ISS_REGIONS, { error: `must be one of: ${ISS_REGIONS.join(', ')}` }),
  ais: z
    .number({ error: 'must be a number' })
    .int({ error: 'must be a whole number' })
    .min(1, { error: 'must be at least 1' })
    // AIS 9 (severity not known) cannot be scored; the registry must resolve it first.
    .max(6, { error: 'must be at most 6 (AIS 9, severity unknown, cannot be scored)' }),
});
export type AisInjury = z.infer<typeof AisInjury>;

export const IssInput = z.object({ injuries: z.array(AisInjury, { error: 'must be a list' }) }, { error: 'must be an object with injuries' });
export type IssInput = z.infer<typeof IssInput>;

const MAX_SCORE = 75;

/** Sum of squares of the highest AIS in each of the three most injured regions; any AIS 6 → 75. */
export function injurySeverityScore(injuries: readonly AisInjury[]): number {
  const worst = new Map<IssRegion, number>();
  for (const injury of injuries) {
    if (injury.ais === 6) return MAX_SCORE;
    worst.set(injury.region, Math.max(worst.get(injury.region) ?? 0, injury.ais));
  }
  return sumOfTopThreeSquares([...worst.values()]);
}

/** Sum of squares of the three highest AIS values, whatever their regions; any AIS 6 → 75. */
export function newInjurySeverityScore(injuries: readonly AisInjury[]): number {
  if (injuries.some((injury) => injury.ais === 6)) return MAX_SCORE;
  return sumOfTopThreeSquares(injuries.map((injury) => injury.ais));
}

function sumOfTopThreeSquares(values: number[]): number {
  return values
    .sort((a, b) => b - a)
    .slice(0, 3)
    .reduce((sum, v) => sum + v * v, 0);
}

export function injuryScores(injuries: readonly AisInjury[]): { iss: number; niss: number } {
  return { iss: injurySeverityScore(injuries), niss: newInjurySeverityScore(injuries) };
}
