import { describe, expect, it } from 'vitest';
import { becauseInUnit, formatHeight, formatHeightFact, formatThreshold } from '../../../../shared/board/height-display';
import { evaluate } from '../../../../shared/triage/evaluate';
import type { ClinicalInput } from '../../../../shared/schemas/clinical';

// Check values, worked by hand:
// - 1 ft = 0.3048 m exactly (the international foot; SOURCES.md §8), common practice in every
//   conversion; one storey counted as 10 ft = 3.048 m (SOURCES.md §8).
// - The 2021 guideline's fall criterion: more than 10 ft (3.048 m) at any age (SOURCES.md §2.6,
//   Newgard 2022) [source]; its low-level fall, 10 ft or less, is our reading (SOURCES.md §2.6) [ours].
// - The 2011 guideline's adult fall: more than 20 ft (6.096 m) (SOURCES.md §3.4, Sasser 2012) [source].

const adult = (heightM: number, extra: Partial<ClinicalInput> = {}): ClinicalInput =>
  ({ ageYears: 40, sex: 'male', fall: { heightM, surface: 'concrete', firstImpact: 'lower-limb-feet', headImpact: false }, ...extra }) as ClinicalInput;
const fallCriterion = (input: ClinicalInput, set: 'field-2021' | 'field-2011' = 'field-2021') =>
  evaluate(input, { set }).criteria.find((c) => c.heights?.length);

describe('a patient’s fall height: one decimal in the reader’s unit', () => {
  it('3.658 m is 12.0 ft (3.658 / 0.3048 = 12.0013), 3.7 m, 1.2 storeys', () => {
    expect(formatHeight(3.658, 'ft')).toBe('12.0 ft');
    expect(formatHeight(3.658, 'm')).toBe('3.7 m');
    expect(formatHeight(3.658, 'storeys')).toBe('1.2 storeys');
  });

  it('keeps the ".0" of a whole figure, so it never reads like a criterion’s exact one', () => {
    // 3.048 / 0.3048 = 10 exactly; 6.096 / 0.3048 = 20 exactly.
    expect(formatHeight(3.048, 'ft')).toBe('10.0 ft');
    expect(formatHeight(6.096, 'ft')).toBe('20.0 ft');
    expect(formatHeight(3.048, 'storeys')).toBe('1.0 storey');
    expect(formatHeight(0, 'ft')).toBe('from standing');
  });
});

describe('a criterion’s figure: exact, the reader’s unit first where it is exact in it', () => {
  it('10 ft is 3.048 m exactly, either way round', () => {
    expect(formatThreshold(3.048, 'ft')).toBe('10 ft (3.048 m)');
    expect(formatThreshold(3.048, 'm')).toBe('3.048 m (10 ft)');
    expect(formatThreshold(3.048, 'storeys')).toBe('10 ft (3.048 m)');
    expect(formatThreshold(6.096, 'ft')).toBe('20 ft (6.096 m)');
  });

  it('a figure set in metres keeps its metres first: 6 m is 19.685 ft, shown 19.7', () => {
    expect(formatThreshold(6, 'ft')).toBe('6 m (19.7 ft)');
    expect(formatThreshold(6, 'm')).toBe('6 m (19.7 ft)');
    // 15 ft, a hospital's own figure typed in feet: 15 × 0.3048 = 4.572 m.
    expect(formatThreshold(4.572, 'ft')).toBe('15 ft (4.572 m)');
  });
});

describe('the engine’s reasons with the heights in the hospital’s unit', () => {
  it('fall 12 ft at a feet hospital: "fall 12.0 ft (3.7 m), above the 10 ft (3.048 m) threshold"', () => {
    const fired = fallCriterion(adult(3.658))!;
    expect(fired.id).toBe('field-2021:fall-above-10-ft');
    // The engine's own words and numbers stay as they were.
    expect(fired.because).toBe('fall 3.658 m (12 ft) > 3.048 m (10 ft)');
    expect(fired.heights).toEqual([{ text: 'fall 3.658 m (12 ft) > 3.048 m (10 ft)', heightM: 3.658, compared: { relation: 'above', thresholdM: 3.048 } }]);
    expect(becauseInUnit(fired, 'ft')).toBe('fall 12.0 ft (3.7 m), above the 10 ft (3.048 m) threshold');
    expect(becauseInUnit(fired, 'm')).toBe('fall 3.7 m (12.0 ft), above the 3.048 m (10 ft) threshold');
  });

  it('boundary: 3.05 m shows 10.0 ft and is above the 10 ft threshold (3.05 > 3.048)', () => {
    const fired = fallCriterion(adult(3.05))!;
    expect(fired.id).toBe('field-2021:fall-above-10-ft');
    // 3.05 / 0.3048 = 10.0066 → 10.0 ft; 3.05 m → 3.1 m (one decimal, half up).
    expect(becauseInUnit(fired, 'ft')).toBe('fall 10.0 ft (3.1 m), above the 10 ft (3.048 m) threshold');
  });

  it('boundary: 3.048 m exactly is not above 10 ft; at 70 with a head strike it is a low-level fall', () => {
    expect(evaluate(adult(3.048)).criteria.map((c) => c.id)).not.toContain('field-2021:fall-above-10-ft');
    const older = adult(3.048, { ageYears: 70, fall: { heightM: 3.048, surface: 'concrete', firstImpact: 'head', headImpact: true } } as Partial<ClinicalInput>);
    const fired = fallCriterion(older)!;
    expect(fired.id).toBe('field-2021:low-level-fall-head-impact');
    expect(becauseInUnit(fired, 'ft')).toBe('age 70 (65 or older), fall 10.0 ft (3.0 m), at or below the 10 ft (3.048 m) threshold, head struck');
  });

  it('a fall from standing says so, beside the figure', () => {
    const older = adult(0, { ageYears: 80, fall: { heightM: 0, surface: 'tile-stone', firstImpact: 'head', headImpact: true } } as Partial<ClinicalInput>);
    expect(becauseInUnit(fallCriterion(older)!, 'm')).toBe('age 80 (65 or older), fall from standing, at or below the 3.048 m (10 ft) threshold, head struck');
  });

  it('2011 adult rule: 6.1 m is 20.0 ft (20.013) and above the 20 ft (6.096 m) threshold', () => {
    const fired = evaluate(adult(6.1), { set: 'field-2011' }).criteria.find((c) => c.id === 'field-2011:fall-adult-above-20-ft')!;
    expect(becauseInUnit(fired, 'ft')).toBe('fall 20.0 ft (6.1 m), above the 20 ft (6.096 m) threshold, age 40 (15 or older)');
  });

  it('a child’s height rule has no fixed figure: the height alone changes unit, the rest is the engine’s', () => {
    // 6-year-old, 110 cm, fall 2.21 m: more than twice their height (SOURCES.md §3.4) [source, our reading].
    const child = { ageYears: 6, sex: 'female', bodyHeightCm: 110, fall: { heightM: 2.21, surface: 'concrete', firstImpact: 'lower-limb-feet', headImpact: false } } as ClinicalInput;
    const fired = fallCriterion(child, 'field-2011')!;
    expect(fired.because).toBe("fall 2.21 m (7.3 ft) > 2 × the child's height (height 1.1 m as recorded), age 6 (under 15)");
    // 2.21 / 0.3048 = 7.2507 → 7.3 ft.
    expect(becauseInUnit(fired, 'ft')).toBe("fall 7.3 ft (2.2 m) > 2 × the child's height (height 1.1 m as recorded), age 6 (under 15)");
  });

  it('a result stored before heights were kept as numbers reads as stored', () => {
    expect(becauseInUnit({ because: 'fall 4 m (13.1 ft) > 3.048 m (10 ft)' }, 'ft')).toBe('fall 4 m (13.1 ft) > 3.048 m (10 ft)');
  });

  it('other criteria carry no heights and read as the engine wrote them', () => {
    const shocked = evaluate(adult(1, { vitals: { sbp: 84 } } as Partial<ClinicalInput>)).criteria.find((c) => c.id.includes('sbp'))!;
    expect(shocked.heights).toBeUndefined();
    expect(becauseInUnit(shocked, 'ft')).toBe(shocked.because);
  });

  it('a bare height fact reads without a threshold', () => {
    expect(formatHeightFact({ text: 'x', heightM: 4 }, 'ft')).toBe('fall 13.1 ft (4.0 m)'); // 4 / 0.3048 = 13.123
  });
});
