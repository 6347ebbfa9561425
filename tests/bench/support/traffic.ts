// Deterministic traffic for the benchmark: the same run sends the same pre-alerts every time.
import type { ClinicalInput } from '../../../shared/schemas/clinical';
import { SURFACES } from '../../../shared/schemas/clinical-options';

export function seededRandom(seed: number): () => number {
  let state = seed >>> 0;
  return () => (state = (Math.imul(state, 1103515245) + 12345) >>> 0) / 2 ** 32;
}

export function trafficOf(random: () => number) {
  const between = (lo: number, hi: number) => lo + Math.floor(random() * (hi - lo + 1));
  const pick = <T>(list: readonly T[]): T => list[Math.floor(random() * list.length)];
  return {
    between,
    pick,
    /** A fall patient as a crew first reports them [ours]: mostly low falls, some from height. */
    firstReport(): ClinicalInput {
      const fromHeight = random() < 0.3;
      return {
        ageYears: fromHeight ? between(18, 70) : between(60, 96),
        sex: pick(['female', 'male'] as const),
        anticoagulant: random() < 0.3 ? true : random() < 0.5 ? false : null,
        fall: { heightM: fromHeight ? between(30, 120) / 10 : 0, surface: pick(SURFACES), headImpact: random() < 0.4 },
        vitals: { sbp: between(85, 170), hr: between(60, 120), rr: between(10, 28), spo2: between(90, 100), spo2RoomAir: true, gcsTotal: between(12, 15) },
        findings: [],
        considerations: [],
      };
    },
    /** New vitals en route, on the same patient. */
    update(previous: ClinicalInput): ClinicalInput {
      return { ...previous, vitals: { ...previous.vitals, sbp: between(80, 170), hr: between(60, 130), gcsTotal: between(11, 15) } };
    },
  };
}

export function percentile(sorted: readonly number[], p: number): number | null {
  if (!sorted.length) return null;
  const index = Math.min(sorted.length - 1, Math.max(0, Math.ceil((p / 100) * sorted.length) - 1));
  return sorted[index];
}

export const round1 = (value: number | null) => (value == null ? null : Math.round(value * 10) / 10);
