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

export function fallImpact(heightM: number, surface?: Surface | null, weightKg?: number | null): Impact {
  const { G, impactSpeed, vacuumImpactSpeed, fallTime, vacuumFallTime, kineticEnergy, meanDeceleration } = physics;
  const speed = impactSpeed(heightM);
  const stop = surface ? stopping[surface].metres : null;
  return {
    heightM,
    heightFt: heightM / 0.3048,
    speedMps: speed,
    speedKmh: speed * 3.6,
    vacuumSpeedMps: vacuumImpactSpeed(heightM),
    fallTimeS: fallTime(heightM),
    vacuumFallTimeS: vacuumFallTime(heightM),
    terminalSpeedMps: physics.DEFAULT_TERMINAL_SPEED_MPS,
    kineticEnergyJ: weightKg != null ? kineticEnergy(weightKg, speed) : null,
    stoppingDistanceM: stop,
    meanDecelerationG: stop !== null && heightM > 0 ? meanDeceleration(speed, stop) / G : null,
    decelerationIsEstimate: true,
  };
}
