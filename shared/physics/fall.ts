// Fall physics shown as context beside the criteria, never as a criterion.
// Formulas [source: standard mechanics]: v = √(2gh) and t = √(2h/g) without drag; with quadratic
// drag and terminal speed vt, v(h) = vt·√(1 − exp(−2gh/vt²)) and h(t) = (vt²/g)·ln cosh(g·t/vt).

/** Standard gravity, m/s² [source: standard mechanics]. */
export const G = 9.80665;
/** A person falling belly-down reaches about 54–56 m/s [trade]. */
export const DEFAULT_TERMINAL_SPEED_MPS = 55;

export function vacuumImpactSpeed(heightM: number): number {
  return Math.sqrt(2 * G * heightM);
}

export function impactSpeed(heightM: number, terminalSpeedMps: number = DEFAULT_TERMINAL_SPEED_MPS): number {
  // expm1 keeps precision for the short falls that are most of the work.
  return terminalSpeedMps * Math.sqrt(-Math.expm1((-2 * G * heightM) / (terminalSpeedMps * terminalSpeedMps)));
}

export function vacuumFallTime(heightM: number): number {
  return Math.sqrt((2 * heightM) / G);
}

/** h(t) inverted: t = (vt/g)·acosh(e^x), x = gh/vt², written as x + ln(1 + √(1 − e^(−2x))) so it cannot overflow. */
export function fallTime(heightM: number, terminalSpeedMps: number = DEFAULT_TERMINAL_SPEED_MPS): number {
  const x = (G * heightM) / (terminalSpeedMps * terminalSpeedMps);
  return (terminalSpeedMps / G) * (x + Math.log1p(Math.sqrt(-Math.expm1(-2 * x))));
}

/** Distance fallen after t seconds with drag, the forward form of the formula above. */
export function fallDistance(timeS: number, terminalSpeedMps: number = DEFAULT_TERMINAL_SPEED_MPS): number {
  const y = (G * timeS) / terminalSpeedMps;
  // ln cosh y = y + ln(1 + e^(−2y)) − ln 2, stable for large y.
  return ((terminalSpeedMps * terminalSpeedMps) / G) * (y + Math.log1p(Math.exp(-2 * y)) - Math.LN2);
}

export function kineticEnergy(massKg: number, speedMps: number): number {
  return 0.5 * massKg * speedMps * speedMps;
}

/** Mean deceleration a = v²/(2d) over a stopping distance d, in m/s² [source: standard mechanics]. */
export function meanDeceleration(speedMps: number, stoppingDistanceM: number): number {
  return (speedMps * speedMps) / (2 * stoppingDistanceM);
}

export const mpsToKmh = (mps: number): number => mps * 3.6;
