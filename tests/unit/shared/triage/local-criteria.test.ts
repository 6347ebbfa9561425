import { describe, expect, it } from 'vitest';
import { evaluate } from '../../../../shared/triage/evaluate';
import {
  checkCondition, conditionToWhen, readBack, settleLocalCriterion, whenToCondition, withLocalCriteria,
  type LocalCondition, type LocalCriterionDraft,
} from '../../../../shared/triage/local-criteria';
import { ACS_MINIMUM, HIGH_RISK_2021, looseningWarnings } from '../../../../shared/triage/loosening';
import { EXAMPLE_POLICY, validatePolicy, type Policy } from '../../../../shared/triage/policy';
import { patient } from './cases';

// One foot is 0.3048 m (international yard and pound agreement, 1959) [source]; 15 ft is a
// local threshold written for these tests, not a guideline value.
const FIFTEEN_FT_M = 4.572;

const olderHighFall: LocalCondition = {
  join: 'all',
  heightUnit: 'ft',
  parts: [
    { kind: 'measure', measure: 'age', comparison: 'at-least', value: 55 },
    { kind: 'measure', measure: 'fallHeight', comparison: 'above', value: 15 },
  ],
};

function policyWith(drafts: LocalCriterionDraft[], level: 'full' | 'limited' | 'consult' = 'full', base: Policy = EXAMPLE_POLICY): Policy {
  const id = 'alderwick-activation', version = 4;
  const local = drafts.map((d) => settleLocalCriterion(d, id, version, 'Alderwick General Hospital'));
  const rules = base.rules.map((rule) => (rule.level === level ? { ...rule, criteria: [...rule.criteria, ...local.map((c) => c.id)] } : rule));
  const check = validatePolicy({ ...base, id, version, example: false, rules, localCriteria: local });
  if (!check.ok) throw new Error(JSON.stringify(check.issues));
  return withLocalCriteria(check.policy);
}

describe('the condition builder', () => {
  it('writes "age 55 or older and fall above 15 ft" as the engine\'s when tree', () => {
    expect(conditionToWhen(olderHighFall)).toEqual({
      kind: 'all',
      of: [
        // Completed years, as the 2021 guideline's age bands are read [ours].
        { kind: 'age', from: 55, label: '55 or older' },
        { kind: 'above', quantity: 'heightM', value: FIFTEEN_FT_M, display: '4.572 m (15 ft)' },
      ],
    });
  });

  it('reads the rule back as a clinician would say it', () => {
    expect(readBack(olderHighFall)).toBe('Age 55 or older and fall above 4.6 m (15 ft)');
  });

  it('round-trips every measure, comparison, band, flag, finding, consideration and group through when and the sentence', () => {
    const conditions: LocalCondition[] = [
      olderHighFall,
      { join: 'any', heightUnit: 'm', parts: [{ kind: 'measure', measure: 'sbp', comparison: 'at-least', value: 200 }, { kind: 'measure', measure: 'hr', comparison: 'at-most', value: 40 }] },
      { join: 'all', heightUnit: 'storeys', parts: [{ kind: 'measure', measure: 'fallHeight', comparison: 'at-least', value: 2 }, { kind: 'age-band', from: 10, to: 17 }] },
      { join: 'all', heightUnit: 'ft', parts: [{ kind: 'flag', flag: 'anticoagulant' }, { kind: 'flag', flag: 'headImpact' }, { kind: 'measure', measure: 'age', comparison: 'above', value: 70 }] },
      {
        join: 'all', heightUnit: 'm', parts: [
          { kind: 'measure', measure: 'age', comparison: 'below', value: 16 },
          { kind: 'group', join: 'any', parts: [{ kind: 'finding', finding: 'pelvic-fracture' }, { kind: 'consideration', consideration: 'burns' }, { kind: 'measure', measure: 'spo2RoomAir', comparison: 'below', value: 92 }] },
        ],
      },
      { join: 'any', heightUnit: 'ft', parts: [{ kind: 'measure', measure: 'gcsTotal', comparison: 'at-most', value: 12 }, { kind: 'measure', measure: 'gcsMotor', comparison: 'below', value: 5 }, { kind: 'measure', measure: 'rr', comparison: 'above', value: 30 }, { kind: 'measure', measure: 'age', comparison: 'at-most', value: 2 }] },
    ];
    for (const c of conditions) {
      const when = conditionToWhen(c);
      const back = whenToCondition(when, c.heightUnit);
      expect(back).toEqual(c);
      expect(readBack(back)).toBe(readBack(c));
      expect(checkCondition(c)).toEqual([]);
    }
    expect(readBack(conditions[4])).toBe('Age under 16 and (suspected broken pelvis, burns as well as the injury or SpO2 on room air below 92 %)');
  });

  it('makes "at least" exactly that: 90 meets SBP at least 90, 89.9 does not', () => {
    const policy = policyWith([{ id: 'new-1', label: 'Hypertensive', reason: 'Committee minutes, 2026-11-02', condition: { join: 'all', heightUnit: 'm', parts: [{ kind: 'measure', measure: 'sbp', comparison: 'at-least', value: 90 }] } }], 'consult');
    const met = evaluate(patient({ vitals: { sbp: 90 } }), { policy }).criteria.find((c) => c.set === 'local');
    expect(met?.because).toBe('SBP 90 ≥ 90');
    expect(evaluate(patient({ vitals: { sbp: 89.9 } }), { policy }).criteria.some((c) => c.set === 'local')).toBe(false);
  });
});

describe('a local criterion in the engine', () => {
  const draft: LocalCriterionDraft = { id: 'new-1', label: 'Fall above 15 ft', reason: 'Trauma committee, 2 November 2026', condition: { join: 'all', heightUnit: 'ft', parts: [{ kind: 'measure', measure: 'fallHeight', comparison: 'above', value: 15 }] } };

  it('calls its level and cites the local policy and the reason', () => {
    const policy = policyWith([draft]);
    // 5 m is 16.4 ft, above 15 ft; below the example's 20 ft (6.096 m) limited rule [source: SOURCES.md §6 example policy, ours].
    const result = evaluate(patient({ fall: { heightM: 5 } }), { policy });
    expect(result.activation).toBe('full');
    const local = result.criteria.find((c) => c.set === 'local')!;
    expect(local.label).toBe('Fall above 15 ft');
    expect(local.source).toBe('Local policy of Alderwick General Hospital, version 4. Reason: Trauma committee, 2 November 2026');
    expect(local.because).toBe('fall 5 m (16.4 ft) > 4.572 m (15 ft)');
    expect(local.calls).toBe('full');
    // 4 m (13.1 ft) is below the local threshold: the fall above 10 ft calls only a consult [source: Newgard 2022, 10 ft].
    expect(evaluate(patient({ fall: { heightM: 4 } }), { policy }).activation).toBe('consult');
  });

  it('names the missing inputs an unknown local rule needs', () => {
    const policy = policyWith([{
      id: 'new-1', label: 'Older, on an anticoagulant, low pressure', reason: 'Committee minutes',
      condition: { join: 'all', heightUnit: 'm', parts: [{ kind: 'measure', measure: 'age', comparison: 'at-least', value: 65 }, { kind: 'flag', flag: 'anticoagulant' }, { kind: 'measure', measure: 'sbp', comparison: 'below', value: 120 }] },
    }]);
    const result = evaluate(patient({ ageYears: 80, anticoagulant: null, vitals: { sbp: null } }), { policy });
    expect(result.activation).not.toBe('full');
    expect(result.missing.map((m) => m.field)).toEqual(expect.arrayContaining(['vitals.sbp', 'anticoagulant']));
    // Once given, the same inputs decide it: met, and the level it calls.
    const given = evaluate(patient({ ageYears: 80, anticoagulant: true, vitals: { sbp: 115 } }), { policy });
    expect(given.activation).toBe('full');
    expect(given.criteria.find((c) => c.set === 'local')?.because).toBe('on an anticoagulant, SBP 115 < 120, age 80 (65 or older)');
  });

  it('refuses a stored criterion whose when or id was changed', () => {
    const settled = settleLocalCriterion(draft, 'alderwick-activation', 4, 'Alderwick General Hospital');
    const rules = [{ level: 'full' as const, criteria: [settled.id] }];
    const tampered = { ...settled, when: { kind: 'above', quantity: 'heightM', value: 1 } as const };
    const check = validatePolicy({ ...EXAMPLE_POLICY, id: 'alderwick-activation', version: 4, rules, localCriteria: [tampered] });
    expect(check.ok).toBe(false);
    if (!check.ok) expect(check.issues[0].field).toBe('localCriteria[0].when');
    const otherVersion = validatePolicy({ ...EXAMPLE_POLICY, id: 'alderwick-activation', version: 5, rules, localCriteria: [settled] });
    expect(otherVersion.ok).toBe(false);
    if (!otherVersion.ok) expect(otherVersion.issues[0].field).toBe('localCriteria[0].id');
  });
});

describe('impossible and empty rules are refused, naming the part', () => {
  const one = (part: LocalCondition['parts'][number]): LocalCondition => ({ join: 'all', heightUnit: 'm', parts: [part] });
  it('SBP above 400', () => {
    const issues = checkCondition(one({ kind: 'measure', measure: 'sbp', comparison: 'above', value: 400 }));
    expect(issues).toEqual([{ field: 'condition.parts[0].value', message: 'SBP above 400 mmHg: SBP must lie between 0 and 300 mmHg' }]);
  });
  it('an age band from 70 to 60', () => {
    expect(checkCondition(one({ kind: 'age-band', from: 70, to: 60 }))).toEqual([{ field: 'condition.parts[0]', message: 'age band from 70 to 60: the band starts after it ends' }]);
  });
  it('a condition nothing can meet: SBP above 120 and below 100', () => {
    const issues = checkCondition({ join: 'all', heightUnit: 'm', parts: [{ kind: 'measure', measure: 'sbp', comparison: 'above', value: 120 }, { kind: 'measure', measure: 'sbp', comparison: 'below', value: 100 }] });
    expect(issues).toEqual([{ field: 'condition', message: 'a condition nothing can meet: SBP above 120 mmHg and SBP below 100 mmHg cannot all hold at once' }]);
  });
  it('age over 60 inside the band 10–60 in completed years', () => {
    const issues = checkCondition({ join: 'all', heightUnit: 'm', parts: [{ kind: 'age-band', from: 10, to: 60 }, { kind: 'measure', measure: 'age', comparison: 'above', value: 60 }] });
    expect(issues[0].message).toMatch(/nothing can meet/);
  });
  it('GCS below 3 and an empty condition or group', () => {
    expect(checkCondition(one({ kind: 'measure', measure: 'gcsTotal', comparison: 'below', value: 3 }))[0]).toEqual({ field: 'condition.parts[0]', message: 'GCS below 3: no patient can meet this (GCS runs from 3 to 15)' });
    expect(checkCondition({ join: 'all', heightUnit: 'm', parts: [] })).toEqual([{ field: 'condition.parts', message: 'the condition is empty: add at least one part' }]);
    expect(checkCondition(one({ kind: 'group', join: 'any', parts: [] }))[0].field).toBe('condition.parts[0].parts');
  });
  it('SpO2 on room air above a value, which the engine cannot read', () => {
    expect(checkCondition(one({ kind: 'measure', measure: 'spo2RoomAir', comparison: 'above', value: 95 }))[0].field).toBe('condition.parts[0].comparison');
  });
});

describe('loosening warnings', () => {
  const moveTo = (policy: Policy, id: string, level: 'limited' | 'consult' | null): Policy => ({
    ...policy,
    rules: policy.rules.map((r) => ({ ...r, criteria: r.criteria.filter((c) => c !== id) }))
      .map((r) => (r.level === level ? { ...r, criteria: [...r.criteria, id] } : r))
      .filter((r) => r.criteria.length > 0),
  });

  it('the shipped example loosens nothing', () => {
    expect(looseningWarnings(EXAMPLE_POLICY, EXAMPLE_POLICY)).toEqual([]);
  });

  // Guarded sets: 2021 high-risk [source: Newgard 2022]; ACS minimum [source: ACS 2014 via Tignanelli 2018; wording: memory].
  it.each(HIGH_RISK_2021)('fires for the 2021 high-risk criterion %s when it is removed', (id) => {
    const warnings = looseningWarnings(moveTo(EXAMPLE_POLICY, id, null), EXAMPLE_POLICY);
    expect(warnings.map((w) => w.criterion)).toEqual([id]);
    expect(warnings[0].after).toBe('none');
  });

  it.each(ACS_MINIMUM.map((a) => a.id))('fires for the ACS minimum criterion %s when it calls less than the highest level', (id) => {
    const warnings = looseningWarnings(moveTo(EXAMPLE_POLICY, id, 'limited'), EXAMPLE_POLICY);
    expect(warnings.map((w) => [w.criterion, w.guard, w.after])).toEqual([[id, 'ACS minimum', 'limited']]);
    expect(warnings[0].message).toMatch(/not the highest level/);
  });

  it('fires for a high-risk criterion moved from limited to consult, naming both levels', () => {
    const warnings = looseningWarnings(moveTo(EXAMPLE_POLICY, 'field-2021:pelvic-fracture', 'consult'), EXAMPLE_POLICY);
    expect(warnings.map((w) => w.message)).toEqual(['Suspected pelvic fracture (2021 high-risk) is loosened: it calls Trauma consult, where it called Limited trauma team']);
  });

  it('a local criterion only adds: it loosens nothing', () => {
    const policy = policyWith([{ id: 'x', label: 'Fall above 15 ft', reason: 'Minutes', condition: olderHighFall }]);
    expect(looseningWarnings(policy, EXAMPLE_POLICY)).toEqual([]);
  });
});
