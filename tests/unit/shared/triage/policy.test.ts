import { describe, expect, it } from 'vitest';
import { evaluate } from '../../../../shared/triage/evaluate';
import { CRITERION_CATALOG } from '../../../../shared/triage/catalog';
import { EXAMPLE_POLICY, Policy, validatePolicy } from '../../../../shared/triage/policy';
import { patient } from './cases';

const level = (input: Parameters<typeof evaluate>[0]) => evaluate(input).activation;

describe('example tiered policy (SOURCES.md §6) [ours]', () => {
  it('is marked as an example and passes its own validation', () => {
    expect(EXAMPLE_POLICY.example).toBe(true);
    expect(validatePolicy(EXAMPLE_POLICY)).toEqual({ ok: true, policy: EXAMPLE_POLICY });
    expect(Policy.parse(JSON.parse(JSON.stringify(EXAMPLE_POLICY)))).toEqual(EXAMPLE_POLICY);
  });

  it('78-year-old, SBP 88 → full (SBP < 90 at 10 or older)', () => {
    // ACS minimum criteria, Tignanelli 2018: SBP < 90 in adults [source]
    expect(level(patient({ ageYears: 78, vitals: { sbp: 88 } }))).toBe('full');
    expect(level(patient({ ageYears: 78, vitals: { sbp: 90 } }))).toBe('limited');
  });

  it('GCS 8 → full; GCS 9 → limited (motor < 6 is a 2021 high-risk criterion)', () => {
    // ACS minimum criteria, Tignanelli 2018: GCS < 9 [source]
    expect(level(patient({ vitals: { gcs: { eye: 2, verbal: 2, motor: 4 } } }))).toBe('full');
    expect(level(patient({ vitals: { gcs: { eye: 2, verbal: 2, motor: 5 } } }))).toBe('limited');
  });

  it('penetrating wound → full; pelvic fracture → limited', () => {
    // ACS minimum criteria, Tignanelli 2018: gunshot wound to neck, chest, abdomen, proximal limbs [source]
    expect(level(patient({ findings: ['penetrating-head-neck-torso-proximal-limb'] }))).toBe('full');
    expect(level(patient({ findings: ['pelvic-fracture'] }))).toBe('limited');
  });

  it('fall of 20 ft → consult; just over 20 ft → limited', () => {
    // [ours]: example policy, fall > 20 ft (6.096 m) → limited
    expect(level(patient({ fall: { heightM: 6.096 } }))).toBe('consult');
    expect(level(patient({ fall: { heightM: 6.097 } }))).toBe('limited');
  });

  it('no criterion → none, with the policy named in the result', () => {
    const result = evaluate(patient());
    expect(result.activation).toBe('none');
    expect(result.activationName).toBe('No activation');
    expect(result.policy).toEqual({ id: 'example-tiered', version: 1, example: true });
  });
});

describe('validatePolicy', () => {
  const draft = (rules: Policy['rules'], levels: Policy['levels'] = EXAMPLE_POLICY.levels): Policy => ({
    ...EXAMPLE_POLICY, id: 'draft', version: 2, example: false, rules, levels,
  });

  it('refuses an unknown criterion id, naming the rule and the id', () => {
    const check = validatePolicy(draft([{ level: 'full', criteria: ['field-2021:no-such-thing'] }], [{ id: 'full', name: 'Full' }, { id: 'none', name: 'None' }]));
    expect(check).toEqual({ ok: false, issues: [
      { field: 'rules[0].criteria[0]', message: 'unknown criterion id field-2021:no-such-thing' },
      { field: 'levels[0]', message: 'level full is unreachable: every criterion of its rules is caught by a rule above' },
    ] });
  });

  it('refuses a level no rule calls, and one shadowed by the rules above it', () => {
    const check = validatePolicy(draft([
      { level: 'full', criteria: ['policy:gcs-total-below-9'] },
      { level: 'limited', criteria: ['policy:gcs-total-below-9'] },
    ]));
    expect(check.ok).toBe(false);
    if (!check.ok) {
      expect(check.issues).toEqual([
        { field: 'levels[1]', message: 'level limited is unreachable: every criterion of its rules is caught by a rule above' },
        { field: 'levels[2]', message: 'level consult is unreachable: no rule calls it' },
      ]);
    }
  });

  it('refuses rules out of order, a rule for none, and a policy without none', () => {
    const check = validatePolicy(draft(
      [{ level: 'consult', criteria: ['field-2021:anticoagulant'] }, { level: 'full', criteria: ['policy:intubated'] }, { level: 'none', criteria: ['field-2021:burns'] }],
      [{ id: 'full', name: 'Full' }, { id: 'consult', name: 'Consult' }],
    ));
    expect(check.ok).toBe(false);
    if (!check.ok) {
      expect(check.issues.map((i) => i.field)).toEqual(['levels', 'rules[1].level', 'rules[2].level']);
    }
  });

  it('names the field of a malformed policy', () => {
    const check = validatePolicy({ ...EXAMPLE_POLICY, version: 0 });
    expect(check).toEqual({ ok: false, issues: [{ field: 'version', message: 'must be at least 1' }] });
  });

  it('a what-if run of a stricter draft over the same input raises the level', () => {
    // [ours]: a draft calling full for anticoagulated head strikes
    const stricter = draft([
      { level: 'full', criteria: ['field-2021:anticoagulant', ...EXAMPLE_POLICY.rules[0].criteria] },
      ...EXAMPLE_POLICY.rules.slice(1),
    ]);
    expect(validatePolicy(stricter).ok).toBe(true);
    const input = patient({ ageYears: 72, anticoagulant: true, fall: { heightM: 0, headImpact: true } });
    expect(evaluate(input).activation).toBe('consult');
    const whatIf = evaluate(input, { policy: stricter });
    expect(whatIf.activation).toBe('full');
    expect(whatIf.policy).toEqual({ id: 'draft', version: 2, example: false });
  });

  it('evaluate refuses a draft with an unknown criterion rather than guessing', () => {
    expect(() => evaluate(patient(), { policy: draft([{ level: 'full', criteria: ['policy:nope'] }]) })).toThrow(/unknown criterion id policy:nope/);
  });
});

describe('criterion catalog', () => {
  it('has unique ids, a label and a source for each, and NEMSIS codes only for the two falls', () => {
    const ids = CRITERION_CATALOG.map((c) => c.id);
    expect(new Set(ids).size).toBe(ids.length);
    expect(CRITERION_CATALOG.every((c) => c.label.length > 0 && c.source.length > 0)).toBe(true);
    // NEMSIS v3.5.1 eInjury.04: 2904031 fall > 10 ft, 2904033 low-level fall with head impact [source]
    expect(CRITERION_CATALOG.filter((c) => c.nemsis).map((c) => [c.id, c.nemsis!.code])).toEqual([
      ['field-2021:fall-above-10-ft', '2904031'],
      ['field-2021:low-level-fall-head-impact', '2904033'],
    ]);
  });
});
