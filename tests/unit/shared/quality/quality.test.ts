import { describe, expect, it } from 'vitest';
import { cribariMatrix, isMajorTrauma, type TriageOutcome } from '../../../../shared/quality/cribari';
import { injurySeverityScore, newInjurySeverityScore } from '../../../../shared/quality/iss';
import { nftiMet, nftiPositive } from '../../../../shared/quality/nfti';
import { wilsonInterval } from '../../../../shared/quality/wilson';

const rows = (count: number, row: TriageOutcome) => Array.from({ length: count }, () => row);

describe('Cribari matrix', () => {
  // 100 cases worked by hand:
  //   full & ISS > 15: 30 (a)   full & ISS ≤ 15: 20 (b)
  //   not full & ISS > 15: 5 (c)   not full & ISS ≤ 15: 45 (d)
  // Cribari [source: ACS-COT method]: over = b/(a+b) = 20/50 = 0.40; under = c/(c+d) = 5/50 = 0.10.
  // Second definition [memory: Peng & Xiang 2016]: under = c/(a+c) = 5/35 = 0.142857…; over = b/(b+d) = 20/65 = 0.307692…
  const cases = [
    ...rows(30, { fullActivation: true, iss: 25 }),
    ...rows(20, { fullActivation: true, iss: 9 }),
    ...rows(5, { fullActivation: false, iss: 16 }),
    ...rows(45, { fullActivation: false, iss: 15 }),
  ];

  it('counts the four cells and both pairs of rates', () => {
    const m = cribariMatrix(cases);
    expect([m.a, m.b, m.c, m.d]).toEqual([30, 20, 5, 45]);
    expect(m.overTriage).toBe(0.4);
    expect(m.underTriage).toBe(0.1);
    expect(m.sensitivityDefinition.underTriage).toBeCloseTo(5 / 35, 12);
    expect(m.sensitivityDefinition.overTriage).toBeCloseTo(20 / 65, 12);
  });

  it('gives 95 % Wilson intervals', () => {
    // Wilson for 20/50 [source: Wilson 1927]: centre = (0.4 + 1.96²/100)/(1 + 1.96²/50) = 0.4071, half ≈ 0.1310 → 0.276–0.538
    const m = cribariMatrix(cases);
    expect(m.overTriageCI![0]).toBeCloseTo(0.276, 3);
    expect(m.overTriageCI![1]).toBeCloseTo(0.538, 3);
  });

  it('ISS 15 is not major trauma, 16 is; with NFTI either counts; an unknown outcome sits in no cell', () => {
    // Major trauma ISS > 15 [source: SOURCES.md §7]
    expect(isMajorTrauma(15, null, 'iss')).toBe(false);
    expect(isMajorTrauma(16, null, 'iss')).toBe(true);
    expect(isMajorTrauma(9, true, 'iss-or-nfti')).toBe(true);
    expect(isMajorTrauma(9, null, 'iss-or-nfti')).toBeNull();
    const m = cribariMatrix([{ fullActivation: true, iss: 9, nfti: true }, { fullActivation: false, iss: null, nfti: false }], 'iss-or-nfti');
    expect([m.a, m.b, m.c, m.d, m.excluded]).toEqual([1, 0, 0, 0, 1]);
    expect(m.underTriage).toBeNull();
    expect(m.underTriageCI).toBeNull();
  });

  it('runs over 100,000 rows well inside a report budget of 300 ms', () => {
    const many: TriageOutcome[] = Array.from({ length: 100_000 }, (_, i) => ({ fullActivation: i % 3 === 0, iss: i % 40, nfti: i % 7 === 0 }));
    const start = performance.now();
    const m = cribariMatrix(many, 'iss-or-nfti');
    expect(performance.now() - start).toBeLessThan(300);
    expect(m.a + m.b + m.c + m.d + m.excluded).toBe(100_000);
  });
});

describe('Wilson score interval', () => {
  it('is null without a denominator and stays inside 0–1', () => {
    expect(wilsonInterval(0, 0)).toBeNull();
    // 0/10 [source: Wilson 1927]: upper = 1.96²/10 / (1 + 1.96²/10) = 0.2775
    const [lo, hi] = wilsonInterval(0, 10)!;
    expect(lo).toBe(0);
    expect(hi).toBeCloseTo(0.2775, 4);
  });
});

describe('ISS and NISS', () => {
  it('femur AIS 3, spleen AIS 4, ribs AIS 3, tibia AIS 2', () => {
    // Baker 1974 [source]: worst per region: extremities 3, abdomen 4, chest 3 → 3² + 4² + 3² = 9 + 16 + 9 = 34
    // Osler 1997 [source]: three highest whatever region: 4, 3, 3 → 16 + 9 + 9 = 34
    const injuries = [
      { region: 'extremities', ais: 3 }, { region: 'abdomen', ais: 4 }, { region: 'chest', ais: 3 }, { region: 'extremities', ais: 2 },
    ] as const;
    expect(injurySeverityScore(injuries)).toBe(34);
    expect(newInjurySeverityScore(injuries)).toBe(34);
  });

  it('two head injuries: NISS counts both, ISS only the worse', () => {
    // Baker 1974 [source]: head-neck 5, chest 2 → 25 + 4 = 29
    // Osler 1997 [source]: 5, 4, 2 → 25 + 16 + 4 = 45
    const injuries = [{ region: 'head-neck', ais: 5 }, { region: 'head-neck', ais: 4 }, { region: 'chest', ais: 2 }] as const;
    expect(injurySeverityScore(injuries)).toBe(29);
    expect(newInjurySeverityScore(injuries)).toBe(45);
  });

  it('any AIS 6 scores 75; no injuries score 0', () => {
    // Baker 1974 [source]: AIS 6 → ISS 75
    expect(injurySeverityScore([{ region: 'external', ais: 1 }, { region: 'head-neck', ais: 6 }])).toBe(75);
    expect(newInjurySeverityScore([{ region: 'chest', ais: 6 }])).toBe(75);
    expect(injurySeverityScore([])).toBe(0);
  });
});

describe('NFTI', () => {
  const none = { redCellsWithin4h: false, minutesToOperatingRoom: null, minutesToInterventionalRadiology: null, icuDays: null, hoursToVentilation: null, hoursToDeath: null };

  it('each component at its window edge', () => {
    // Roden-Foreman 2017 [source]: OR within 90 min, ICU ≥ 3 days, ventilation within 3 days, death within 60 h, any IR
    expect(nftiPositive(none)).toBe(false);
    expect(nftiPositive({ ...none, minutesToOperatingRoom: 90 })).toBe(true);
    expect(nftiPositive({ ...none, minutesToOperatingRoom: 91 })).toBe(false);
    expect(nftiPositive({ ...none, icuDays: 3 })).toBe(true);
    expect(nftiPositive({ ...none, icuDays: 2.9 })).toBe(false);
    expect(nftiPositive({ ...none, hoursToVentilation: 72 })).toBe(true);
    expect(nftiPositive({ ...none, hoursToVentilation: 73 })).toBe(false);
    expect(nftiPositive({ ...none, hoursToDeath: 60 })).toBe(true);
    expect(nftiPositive({ ...none, hoursToDeath: 61 })).toBe(false);
    expect(nftiPositive({ ...none, minutesToInterventionalRadiology: 600 })).toBe(true);
    expect(nftiMet({ ...none, redCellsWithin4h: true, hoursToDeath: 10 })).toEqual(['redCellsWithin4h', 'hoursToDeath']);
  });

  it('an unrecorded component leaves a negative record unknown, never negative', () => {
    expect(nftiPositive({ ...none, redCellsWithin4h: null })).toBeNull();
    expect(nftiPositive({ redCellsWithin4h: false })).toBeNull();
  });
});
