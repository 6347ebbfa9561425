import type { Surface } from '../schemas/clinical-options';
import { DEFAULT_TERMINAL_SPEED_MPS, G, fallTime, impactSpeed, kineticEnergy, meanDeceleration, vacuumFallTime, vacuumImpactSpeed } from './fall';
import { STOPPING_DISTANCE } from './surfaces';

// Module-local copies: some loaders compile imported bindings into getter calls, and this runs
// once per evaluation.
const physics = { DEFAULT_TERMINAL_SPEED_MPS, G, fallTime, impactSpeed, kineticEnergy, meanDeceleration, vacuumFallTime, vacuumImpactSpeed };
const stopping = STOPPING_DISTANCE;

export interface Impact {
  heightM: number;
  heightFt: number;
  /** With drag at the default terminal speed. */
  speedMps: number;
  speedKmh: number;
  vacuumSpeedMps: number;
  /** With drag; vacuumFallTimeS without. */
  fallTimeS: number;
  vacuumFallTimeS: number;
  terminalSpeedMps: number;
  /** Only when a weight is known. */
  kineticEnergyJ: number | null;
  /** From an estimated stopping distance for the surface [memory]; null when the surface gives none. */
  stoppingDistanceM: number | null;
  meanDecelerationG: number | null;
  decelerationIsEstimate: true;
}

// Recorded heights repeat (standing, whole and tenth metres), so the height-only results of the
// last few heights are kept, saving the exp/sqrt/log work per evaluation. Slots start as NaN with
// NaN results, which is also what the formulas give for NaN, and are matched with Object.is so
// that −0 and +0 keep their own signed results.
const SLOTS = 64;
const slotHeight = new Float64Array(SLOTS).fill(NaN);
const slotSpeed = new Float64Array(SLOTS).fill(NaN);
const slotVacuumSpeed = new Float64Array(SLOTS).fill(NaN);
const slotFallTime = new Float64Array(SLOTS).fill(NaN);
const slotVacuumFallTime = new Float64Array(SLOTS).fill(NaN);

function heightSlot(heightM: number): number {
  const k = (heightM * 10) & (SLOTS - 1);
  if (!Object.is(slotHeight[k], heightM)) {
    slotHeight[k] = heightM;
    slotSpeed[k] = physics.impactSpeed(heightM);
    slotVacuumSpeed[k] = physics.vacuumImpactSpeed(heightM);
    slotFallTime[k] = physics.fallTime(heightM);
    slotVacuumFallTime[k] = physics.vacuumFallTime(heightM);
  }
  return k;
}

export function fallImpact(heightM: number, surface?: Surface | null, weightKg?: number | null): Impact {
  const { G, kineticEnergy, meanDeceleration } = physics;
  const k = heightSlot(heightM);
  const speed = slotSpeed[k];
  const stop = surface ? stopping[surface].metres : null;
  return {
    heightM,
    heightFt: heightM / 0.3048,
    speedMps: speed,
    speedKmh: speed * 3.6,
    vacuumSpeedMps: slotVacuumSpeed[k],
    fallTimeS: slotFallTime[k],
    vacuumFallTimeS: slotVacuumFallTime[k],
    terminalSpeedMps: physics.DEFAULT_TERMINAL_SPEED_MPS,
    kineticEnergyJ: weightKg != null ? kineticEnergy(weightKg, speed) : null,
    stoppingDistanceM: stop,
    meanDecelerationG: stop !== null && heightM > 0 ? meanDeceleration(speed, stop) / G : null,
    decelerationIsEstimate: true,
  };
}
