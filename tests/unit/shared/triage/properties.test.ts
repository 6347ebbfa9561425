import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import type { ClinicalInput } from '../../../../shared/schemas/clinical';
import { CONSIDERATIONS, FINDINGS } from '../../../../shared/schemas/clinical-options';
import { activationOf, evaluate } from '../../../../shared/triage/evaluate';
import { settleLocalCriterion } from '../../../../shared/triage/local-criteria';
import type { Criterion } from '../../../../shared/triage/criteria';
import { criterionState } from './oracle';
import { EXAMPLE_POLICY, LEVEL_RANK, validatePolicy } from '../../../../shared/triage/policy';
import { CRITERIA_SETS, compiledCriterion } from '../../../../shared/triage/catalog';
import { POLICY_CRITERIA } from '../../../../shared/triage/policy-criteria';
import { createFacts, readFacts } from '../../../../shared/triage/facts';

const RISK_RANK = { none: 0, moderate: 1, high: 2 } as const;
const orNull = <T>(arb: fc.Arbitrary<T>) => fc.option(arb, { nil: null });

const input: fc.Arbitrary<ClinicalInput> = fc.record({
  ageYears: fc.oneof(fc.integer({ min: 0, max: 110 }), fc.double({ min: 0, max: 2, noNaN: true })),
  sex: orNull(fc.constantFrom('female', 'male', 'other', 'unknown') as fc.Arbitrary<'female' | 'male' | 'other' | 'unknown'>),
  pregnancyWeeks: orNull(fc.integer({ min: 0, max: 42 })),
  anticoagulant: orNull(fc.boolean()),
  bodyHeightCm: orNull(fc.integer({ min: 45, max: 200 })),
  fall: fc.record({
    // Thresholds exactly (10 and 20 ft) as well as anywhere between.
    heightM: fc.oneof(fc.double({ min: 0, max: 40, noNaN: true }), fc.constantFrom(0, 3.048, 6.096, 9.144)),
    headImpact: orNull(fc.boolean()),
    firstImpact: orNull(fc.constantFrom('head', 'back', 'unknown') as fc.Arbitrary<'head' | 'back' | 'unknown'>),
  }),
  vitals: fc.record({
    sbp: orNull(fc.integer({ min: 40, max: 220 })),
    hr: orNull(fc.integer({ min: 30, max: 200 })),
    rr: orNull(fc.integer({ min: 0, max: 60 })),
    spo2: orNull(fc.integer({ min: 60, max: 100 })),
    spo2RoomAir: orNull(fc.boolean()),
    gcs: orNull(fc.record({ eye: orNull(fc.integer({ min: 1, max: 4 })), verbal: orNull(fc.integer({ min: 1, max: 5 })), motor: orNull(fc.integer({ min: 1, max: 6 })) })),
    intubated: orNull(fc.boolean()),
    respiratorySupport: orNull(fc.boolean()),
    respiratoryDistress: orNull(fc.boolean()),
  }),
  findings: fc.subarray([...FINDINGS]),
  considerations: fc.subarray([...CONSIDERATIONS]),
});

function notLower(before: ClinicalInput, after: ClinicalInput, set: 'field-2021' | 'field-2011') {
  const a = evaluate(before, { set });
  const b = evaluate(after, { set });
  expect(RISK_RANK[b.fieldRisk]).toBeGreaterThanOrEqual(RISK_RANK[a.fieldRisk]);
  expect(LEVEL_RANK[b.activation]).toBeGreaterThanOrEqual(LEVEL_RANK[a.activation]);
}

const sets = fc.constantFrom('field-2021', 'field-2011') as fc.Arbitrary<'field-2021' | 'field-2011'>;

describe('the level never falls when the patient gets worse', () => {
  it('adding a finding or a consideration', () => {
    fc.assert(fc.property(input, fc.constantFrom(...FINDINGS), fc.constantFrom(...CONSIDERATIONS), sets, (x, finding, consideration, set) => {
      notLower(x, { ...x, findings: [...(x.findings ?? []), finding] }, set);
      notLower(x, { ...x, considerations: [...(x.considerations ?? []), consideration] }, set);
    }), { numRuns: 400 });
  });

  it('a lower SBP, a faster heart, a lower SpO2, a lower GCS part, a breathing rate further from normal', () => {
    fc.assert(fc.property(input, fc.integer({ min: 1, max: 40 }), sets, (x, by, set) => {
      const v = x.vitals!;
      const worse = (patch: Partial<NonNullable<ClinicalInput['vitals']>>) => notLower(x, { ...x, vitals: { ...v, ...patch } }, set);
      if (v.sbp != null) worse({ sbp: Math.max(0, v.sbp - by) });
      if (v.hr != null) worse({ hr: v.hr + by });
      if (v.spo2 != null) worse({ spo2: Math.max(0, v.spo2 - by) });
      if (v.rr != null) worse({ rr: v.rr < 19.5 ? Math.max(0, v.rr - by) : v.rr + by });
      if (v.gcs?.motor != null) worse({ gcs: { ...v.gcs, motor: Math.max(1, v.gcs.motor - 1) } });
      if (v.gcs?.eye != null) worse({ gcs: { ...v.gcs, eye: Math.max(1, v.gcs.eye - 1) } });
    }), { numRuns: 400 });
  });
});

describe('the activation alone, as a what-if asks for it', () => {
  // The example with an invented local criterion on the full team, as a hospital's draft adds one.
  const local = settleLocalCriterion({
    id: 'new-1', label: 'Older adult, fall above 15 ft', reason: 'Invented for the test',
    condition: { join: 'all', heightUnit: 'ft', parts: [{ kind: 'measure', measure: 'age', comparison: 'at-least', value: 55 }, { kind: 'measure', measure: 'fallHeight', comparison: 'above', value: 15 }] },
  }, 'test-local', 1, 'Invented Hospital');
  const checked = validatePolicy({
    ...EXAMPLE_POLICY, id: 'test-local', version: 1, example: false, name: 'Test draft', localCriteria: [local],
    rules: EXAMPLE_POLICY.rules.map((r) => (r.level === 'full' ? { ...r, criteria: [...r.criteria, local.id] } : r)),
  });
  if (!checked.ok) throw new Error(JSON.stringify(checked.issues));
  const draft = checked.policy;

  it('is the level evaluate gives, under the example and under a draft with a local criterion, in both sets', () => {
    fc.assert(fc.property(input, fc.constantFrom('field-2021', 'field-2011') as fc.Arbitrary<'field-2021' | 'field-2011'>, (i, set) => {
      expect(activationOf(i, { set, policy: EXAMPLE_POLICY })).toBe(evaluate(i, { set, policy: EXAMPLE_POLICY }).activation);
      expect(activationOf(i, { set, policy: draft })).toBe(evaluate(i, { set, policy: draft }).activation);
    }), { numRuns: 2000 });
  });
});

describe('the order of findings does not matter', () => {
  it('same result for any order of findings and considerations', () => {
    fc.assert(fc.property(input, fc.infiniteStream(fc.double({ noNaN: true })), sets, (x, noise, set) => {
      const shuffle = <T>(list: readonly T[]) => [...list].map((v) => ({ v, k: noise.next().value })).sort((a, b) => a.k - b.k).map((e) => e.v);
      const shuffled = { ...x, findings: shuffle(x.findings ?? []), considerations: shuffle(x.considerations ?? []) };
      expect(evaluate(shuffled, { set })).toEqual(evaluate(x, { set }));
    }), { numRuns: 300 });
  });
});

describe('unknown is never read as normal', () => {
  it('whatever value a listed missing input would take, no fewer criteria fire than with it unknown', () => {
    fc.assert(fc.property(input, fc.integer({ min: 0, max: 300 }), (x, sbp) => {
      const unknown = evaluate({ ...x, vitals: { ...x.vitals, sbp: null } });
      const known = evaluate({ ...x, vitals: { ...x.vitals, sbp } });
      expect(LEVEL_RANK[known.activation]).toBeGreaterThanOrEqual(LEVEL_RANK[unknown.activation]);
      // Where some SBP would raise the level, the unknown one must say so.
      if (LEVEL_RANK[known.activation] > LEVEL_RANK[unknown.activation]) {
        expect(unknown.missing.map((m) => m.field)).toContain('vitals.sbp');
      }
    }), { numRuns: 400 });
  });
});

describe('the evaluator reads every criterion as the plain three-valued oracle does', () => {
  // The one evaluator (compile-criteria.ts) runs in the browser and on the server alike. A plain
  // walk over each criterion's condition tree, written apart under tests/ (oracle.ts), must give
  // the same met criteria, in the same order, and the same field risk, for any input [ours: an
  // internal consistency check of the rules SOURCES.md states].
  it('met criteria and field risk as the oracle gives them, the policy’s own conditions included', () => {
    fc.assert(fc.property(input, sets, (x, set) => {
      const expectedMet = CRITERIA_SETS[set].criteria.filter((c) => criterionState(c, x) === 'met');
      const result = evaluate(x, { set });
      expect(result.criteria.filter((c) => c.set === set).map((c) => c.id)).toEqual(expectedMet.map((c) => c.id));
      const rank = Math.max(0, ...expectedMet.map((c) => (c.tier === 'high' ? 2 : 1)));
      expect(result.fieldRisk).toBe((['none', 'moderate', 'high'] as const)[rank]);
      const named = new Set(EXAMPLE_POLICY.rules.flatMap((r) => r.criteria));
      const policyMet = POLICY_CRITERIA.filter((c) => named.has(c.id) && criterionState(c, x) === 'met').map((c) => c.id);
      expect(result.criteria.filter((c) => c.set === 'policy').map((c) => c.id)).toEqual(policyMet);
    }), { numRuns: 1500 });
  });

  it('every criterion’s own state, unknown included, as the oracle gives it', () => {
    const all = [...CRITERIA_SETS['field-2021'].criteria, ...CRITERIA_SETS['field-2011'].criteria, ...POLICY_CRITERIA];
    const names = ['not met', 'met', 'unknown'] as const;
    fc.assert(fc.property(input, (x) => {
      const facts = readFacts(x, createFacts());
      for (const c of all) expect([c.id, names[compiledCriterion(c.id)!.test(facts)]]).toEqual([c.id, criterionState(c, x)]);
    }), { numRuns: 1500 });
  });

  it('a criterion given as data, not shipped, is evaluated and carries its own source', () => {
    // A hospital's own criterion appended to the 2021 set [ours: the evaluator reads any criterion as data].
    const local: Criterion = {
      id: 'local:fall-above-2-m-age-70-up', set: 'policy', category: 'mechanism', tier: 'moderate', nemsis: null,
      label: 'Age 70 or older: fall > 2 m', source: 'Alderwick General local rule [ours]', sourceLabel: 'Local rule, Alderwick General',
      when: { kind: 'all', of: [{ kind: 'age', from: 70, label: '70 or older' }, { kind: 'above', quantity: 'heightM', value: 2 }] },
    };
    const set = { ...CRITERIA_SETS['field-2021'], criteria: [...CRITERIA_SETS['field-2021'].criteria, local] };
    const x: ClinicalInput = { ageYears: 72, fall: { heightM: 2.5 }, vitals: { sbp: 140, hr: 80, rr: 16, gcsTotal: 15 }, findings: [] };
    const fired = evaluate(x, { criteria: set }).criteria.find((c) => c.id === local.id);
    expect(fired).toMatchObject({ sourceLabel: 'Local rule, Alderwick General', because: 'fall 2.5 m (8.2 ft) > 2 m, age 72 (70 or older)' });
    expect(criterionState(local, x)).toBe('met');
    expect(evaluate({ ...x, ageYears: 60 }, { criteria: set }).criteria.map((c) => c.id)).not.toContain(local.id);
  });
});

describe('explanations kept per value', () => {
  // The text of a comparison or an age band is kept per value in a few slots, and a slot is
  // reused by whichever value falls in it next. A result must read the same whatever was
  // evaluated before it [ours: an internal consistency check].
  it('the same input gives the same explanations in any order of evaluation', () => {
    fc.assert(fc.property(fc.array(input, { minLength: 50, maxLength: 200 }), sets, (xs, set) => {
      const first = xs.map((x) => JSON.stringify(evaluate(x, { set })));
      // Backwards, and each input after one that differs from it, so that slots are overwritten in between.
      for (let k = xs.length - 1; k >= 0; k--) {
        evaluate(xs[(k * 7 + 3) % xs.length], { set });
        expect(JSON.stringify(evaluate(xs[k], { set }))).toBe(first[k]);
      }
    }), { numRuns: 60 });
  });

  it('the texts read the recorded values themselves', () => {
    // Values a slot could confuse [ours].
    const adult = (sbp: number, heightM: number): ClinicalInput => ({
      ageYears: 40, fall: { heightM }, vitals: { sbp, hr: 70, rr: 16, gcsTotal: 15 }, findings: [],
    });
    const because = (x: ClinicalInput, id: string) => evaluate(x).criteria.find((c) => c.id === id)?.because;
    // Whole numbers 64 apart share a slot (84 and 20), and so do 7.5 m and 4.43 m: (v × 21) & 63 is 29 for both.
    expect(because(adult(84, 0), 'field-2021:sbp-below-90-age-10-64')).toBe('SBP 84 < 90, age 40 (10–64)');
    expect(because(adult(20, 0), 'field-2021:sbp-below-90-age-10-64')).toBe('SBP 20 < 90, age 40 (10–64)');
    expect(because(adult(84, 0), 'field-2021:sbp-below-90-age-10-64')).toBe('SBP 84 < 90, age 40 (10–64)');
    expect(because(adult(120, 7.5), 'field-2021:fall-above-10-ft')).toBe('fall 7.5 m (24.6 ft) > 3.048 m (10 ft)');
    expect(because(adult(120, 4.43), 'field-2021:fall-above-10-ft')).toBe('fall 4.43 m (14.5 ft) > 3.048 m (10 ft)');
    expect(because(adult(120, 7.5), 'field-2021:fall-above-10-ft')).toBe('fall 7.5 m (24.6 ft) > 3.048 m (10 ft)');
  });
});
