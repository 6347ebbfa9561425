import { describe, expect, it } from 'vitest';
import { emptyDraft, toClinical } from '../../../src/forms/clinical-draft';
import { overBlank } from '../../../src/forms/over-blank';

// The crew's kept draft read back over a blank form (src/stores/pre-alert.ts). The values are
// the form's own kinds; no clinical figure is checked here.

const blankForm = () => ({ hospitalId: 1 as number | null, unitId: null as number | null, eta: '', notes: '', clinical: emptyDraft('ft') });

describe('overBlank', () => {
  it('gives back a draft the form kept, whole', () => {
    const typed = blankForm();
    Object.assign(typed.clinical, { age: '45', height: '12', sex: 'female', anticoagulant: true, findings: ['flail-chest'] });
    typed.clinical.handover.allergies = 'penicillin';
    typed.unitId = 3;
    expect(overBlank(blankForm(), JSON.parse(JSON.stringify(typed)))).toEqual(typed);
  });

  it('fills in what a draft of an older version lacks', () => {
    const old = JSON.parse(JSON.stringify(blankForm()));
    old.clinical.age = '70';
    delete old.clinical.handover;
    delete old.notes;
    const read = overBlank(blankForm(), old);
    expect(read.clinical.age).toBe('70');
    expect(read.clinical.handover).toEqual(emptyDraft('ft').handover);
    expect(read.notes).toBe('');
  });

  it('takes nothing of the wrong kind from a draft altered on the device, and the form still reads it', () => {
    const altered = { hospitalId: { id: 1 }, eta: 9, notes: null, clinical: { age: 45, height: '12', findings: 'all', considerations: [1, 2], handover: 'x', gcsEye: [4] } };
    const read = overBlank(blankForm(), altered);
    const blank = blankForm();
    expect(read).toEqual({ ...blank, clinical: { ...blank.clinical, height: '12' } });
    expect(() => toClinical(read.clinical)).not.toThrow();
  });

  it('gives the blank form for a kept value that is not a form at all', () => {
    for (const kept of [null, undefined, 'draft', 42, [1, 2]]) expect(overBlank(blankForm(), kept)).toEqual(blankForm());
  });
});
