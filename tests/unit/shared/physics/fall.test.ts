import { describe, expect, it } from 'vitest';
import { fallDistance, fallTime, impactSpeed, kineticEnergy, meanDeceleration, vacuumFallTime, vacuumImpactSpeed } from '../../../../shared/physics/fall';
import { fallImpact } from '../../../../shared/physics/impact';
import { evaluate } from '../../../../shared/triage/evaluate';

describe('fall physics', () => {
  it('40 m without drag: 28.0 m/s (about 101 km/h) after 2.86 s', () => {
    // √(2 · 9.80665 · 40) = 28.01 m/s; √(2 · 40 / 9.80665) = 2.856 s [source: standard mechanics, SOURCES.md §8]
    expect(vacuumImpactSpeed(40)).toBeCloseTo(28.0, 1);
    expect(vacuumImpactSpeed(40) * 3.6).toBeCloseTo(101, 0);
    expect(vacuumFallTime(40)).toBeCloseTo(2.86, 2);
  });

  it('40 m with drag (vt 55 m/s): about 26 m/s after about 2.9 s', () => {
    // 55 · √(1 − e^(−2·9.80665·40/3025)) = 26.3 m/s [source: standard mechanics, SOURCES.md §8]
    expect(impactSpeed(40)).toBeGreaterThan(25.5);
    expect(impactSpeed(40)).toBeLessThan(26.5);
    expect(fallTime(40)).toBeCloseTo(2.9, 1);
  });

  it('14.8 m: 16.6 m/s with drag against 17.0 without', () => {
    // [source: standard mechanics, SOURCES.md §8]
    expect(impactSpeed(14.8)).toBeCloseTo(16.6, 1);
    expect(vacuumImpactSpeed(14.8)).toBeCloseTo(17.0, 1);
  });

  it('belly-down near 450 m: about 200 km/h after about 12 s', () => {
    // 54–56 m/s (about 200 km/h) after about 12 s and 450 m [trade]
    expect(impactSpeed(450) * 3.6).toBeGreaterThan(190);
    expect(impactSpeed(450) * 3.6).toBeLessThan(200);
    expect(fallTime(450)).toBeGreaterThan(11);
    expect(fallTime(450)).toBeLessThan(13);
  });

  it('fall time with drag inverts h(t) = (vt²/g)·ln cosh(g·t/vt)', () => {
    // [source: standard mechanics]
    for (const h of [0.5, 3, 14.8, 40, 450, 2000]) expect(fallDistance(fallTime(h))).toBeCloseTo(h, 6);
  });

  it('kinetic energy and mean deceleration', () => {
    // E = ½mv²: ½ · 80 · 10² = 4000 J; a = v²/(2d): 10² / (2 · 0.05) = 1000 m/s² [source: standard mechanics]
    expect(kineticEnergy(80, 10)).toBe(4000);
    expect(meanDeceleration(10, 0.05)).toBeCloseTo(1000, 9);
  });

  it('the evaluation carries the impact as context; the stopping distance is an estimate', () => {
    const result = evaluate({ ageYears: 50, weightKg: 80, fall: { heightM: 14.8, surface: 'grass' } });
    expect(result.impact.heightM).toBe(14.8);
    expect(result.impact.speedMps).toBeCloseTo(16.6, 1);
    expect(result.impact.speedKmh).toBeCloseTo(result.impact.speedMps * 3.6, 9);
    expect(result.impact.vacuumSpeedMps).toBeCloseTo(17.0, 1);
    expect(result.impact.kineticEnergyJ).toBeCloseTo(0.5 * 80 * result.impact.speedMps ** 2, 6);
    expect(result.impact.decelerationIsEstimate).toBe(true);
    expect(fallImpact(2, 'unknown').meanDecelerationG).toBeNull();
  });
});
