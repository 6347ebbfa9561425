import { describe, expect, it } from 'vitest';
import { ClinicalInput, describeIssues } from '../../../../shared/schemas/clinical';
import { applyClinicalChanges, clinicalChanges, MergedClinical } from '../../../../shared/schemas/clinical-changes';
import { ClinicalChanges, PreAlertUpdate } from '../../../../shared/schemas/cases';

// 3.05 m typed in metres is above the 10 ft (3.048 m) fall criterion; shown in feet it reads
// "10.0 ft", which is 3.048 m and no longer above it [source: 2021 field-triage guideline,
// Newgard CD et al., 2022]. An update must never send that rounded figure back.
const stored: ClinicalInput = ClinicalInput.parse({
  ageYears: 47,
  sex: 'male',
  anticoagulant: true,
  fall: { heightM: 3.05, surface: 'concrete', entered: { value: 3.05, unit: 'm' } },
  vitals: { sbp: 132, hr: 96 },
  findings: ['skull-deformity'],
  handover: { allergies: 'penicillin', treatments: ['splint'] },
});

describe('an update carries only what the crew changed', () => {
  it('a new heart rate alone is the whole change; the height comes back exactly as stored', () => {
    const shown = { ...stored, fall: { ...stored.fall, heightM: 3.048, entered: { value: 10, unit: 'ft' } } };
    const sent = { ...shown, vitals: { ...shown.vitals, hr: 104 } };
    const changes = clinicalChanges(shown, sent);
    expect(changes).toEqual({ vitals: { hr: 104 } });
    const merged = MergedClinical.parse({ changes: applyClinicalChanges(stored, ClinicalChanges.parse(changes)) }).changes;
    expect(merged.fall).toEqual({ heightM: 3.05, surface: 'concrete', entered: { value: 3.05, unit: 'm' } });
    expect(merged.vitals).toEqual({ sbp: 132, hr: 104 });
    expect(merged.handover).toEqual(stored.handover);
  });

  it('a new height brings its metres and its typed figure together', () => {
    const sent = { ...stored, fall: { ...stored.fall, heightM: 2.5, entered: { value: 2.5, unit: 'm' } } };
    expect(clinicalChanges(stored, sent)).toEqual({ fall: { heightM: 2.5, entered: { value: 2.5, unit: 'm' } } });
    // Metres alone from another sender drop the typed figure they no longer match.
    const merged = applyClinicalChanges(stored, { fall: { heightM: 6 } }) as ClinicalInput;
    expect(merged.fall).toEqual({ heightM: 6, surface: 'concrete' });
  });

  it('a cleared part is sent as null and removed; a list replaces the stored list', () => {
    const sent: Record<string, unknown> = { ...stored, handover: { allergies: 'penicillin', treatments: ['splint', 'analgesia'] } };
    delete sent.findings;
    const changes = clinicalChanges(stored, sent);
    expect(changes).toEqual({ findings: null, handover: { treatments: ['splint', 'analgesia'] } });
    const merged = MergedClinical.parse({ changes: applyClinicalChanges(stored, ClinicalChanges.parse(changes)) }).changes;
    expect(merged.findings).toBeUndefined();
    expect(merged.handover).toEqual({ allergies: 'penicillin', treatments: ['splint', 'analgesia'] });
  });

  it('a bad or unknown changed field is named under changes; the prototype cannot be reached', () => {
    const bad = MergedClinical.safeParse({ changes: applyClinicalChanges(stored, { vitals: { hr: 400 }, fall: { hieght: 3 } }) });
    expect(bad.success).toBe(false);
    const fields = describeIssues(bad.error!).map((i) => i.field);
    expect(fields).toContain('changes.vitals.hr');
    expect(fields.some((f) => f.startsWith('changes.fall'))).toBe(true);
    expect(MergedClinical.safeParse({ changes: applyClinicalChanges(stored, { ageYears: null }) }).success).toBe(false);
    const tampered = ClinicalChanges.parse(JSON.parse('{"vitals":{"__proto__":{"polluted":true}}}'));
    const polluted = MergedClinical.safeParse({ changes: applyClinicalChanges(stored, tampered) });
    expect(polluted.success).toBe(false);
    expect(describeIssues(polluted.error!).map((i) => i.message).join(' ')).toContain('__proto__');
    expect(({} as Record<string, unknown>).polluted).toBeUndefined();
  });

  it('an update names one of changes or a whole report, not both and not neither', () => {
    expect(PreAlertUpdate.safeParse({ caseId: 1, changes: {} }).success).toBe(true);
    expect(PreAlertUpdate.safeParse({ caseId: 1, clinical: stored }).success).toBe(true);
    const neither = PreAlertUpdate.safeParse({ caseId: 1, etaMinutes: 5 });
    expect(neither.success).toBe(false);
    expect(describeIssues(neither.error!)[0].field).toBe('changes');
    expect(PreAlertUpdate.safeParse({ caseId: 1, clinical: stored, changes: {} }).success).toBe(false);
  });
});
