import { describe, expect, it } from 'vitest';
import { AppError } from '../../../../server/errors';
import { preAlertFromBundle } from '../../../../server/exchange/fhir-in';
import { AGE_EXTENSION, HOSPITAL_SYSTEM, LOINC, OWN, PLUMBLINE_CODES, PRE_ALERT_ID_SYSTEM } from '../../../../server/exchange/fhir-codes';

// Reading a FHIR Bundle into a pre-alert: every refusal names where in the Bundle it is.

const own = (code: string) => ({ coding: [{ system: PLUMBLINE_CODES, code }] });
const patient = { resourceType: 'Patient', gender: 'female', extension: [{ url: AGE_EXTENSION, valueAge: { value: 70 } }] };
const encounter = { resourceType: 'Encounter', serviceProvider: { identifier: { system: HOSPITAL_SYSTEM, value: '3' } } };
const fall = { resourceType: 'Observation', code: own(OWN.fall), component: [{ code: own(OWN.fallHeight), valueQuantity: { value: 2.5 } }] };
const gcs = (total: number) => ({
  resourceType: 'Observation',
  code: { coding: [{ system: LOINC, code: '9269-2' }] },
  valueQuantity: { value: total },
  component: [['9267-6', 4], ['9270-0', 4], ['9268-4', 6]].map(([code, value]) => ({ code: { coding: [{ system: LOINC, code }] }, valueQuantity: { value } })),
});
const bundle = (...resources: object[]) => ({ resourceType: 'Bundle', type: 'collection', identifier: { system: PRE_ALERT_ID_SYSTEM, value: 'b1' }, entry: resources.map((resource) => ({ resource })) });

function refusal(raw: unknown): Array<{ field: string; message: string }> {
  try {
    preAlertFromBundle(raw);
  } catch (err) {
    if (err instanceof AppError) return err.issues ?? [];
    throw err;
  }
  throw new Error('accepted');
}

describe('a FHIR Bundle sent as a pre-alert', () => {
  it('reads the age, sex, destination, fall height and GCS parts; a total equal to their sum is not repeated', () => {
    expect(preAlertFromBundle(bundle(patient, encounter, fall, gcs(14)))).toEqual({
      clientId: 'b1',
      hospitalId: 3,
      clinical: { ageYears: 70, sex: 'female', fall: { heightM: 2.5 }, vitals: { gcs: { eye: 4, verbal: 4, motor: 6 } } },
    });
  });

  it('keeps a total that disagrees with its parts, so the schema refuses the mismatch', () => {
    expect((preAlertFromBundle(bundle(patient, encounter, fall, gcs(9))).clinical as { vitals: object }).vitals).toMatchObject({ gcsTotal: 9 });
  });

  it('names a missing Patient, Encounter, fall and sender id', () => {
    const { identifier: _none, ...anonymous } = bundle({ resourceType: 'Observation', code: own(OWN.fieldRisk) });
    expect(refusal(anonymous).map((i) => i.field)).toEqual(['entry', 'entry', 'identifier', 'entry']);
  });

  it('names the entry of a resource or an Observation it does not carry', () => {
    expect(refusal(bundle(patient, encounter, fall, { resourceType: 'Claim' }))).toEqual([{ field: 'entry[3].resource.resourceType', message: 'must be Patient, Encounter, Observation or Provenance' }]);
    expect(refusal(bundle(patient, encounter, fall, { resourceType: 'Observation', code: own('favourite-colour') }))[0].field).toBe('entry[3].resource.code');
  });

  it('refuses what is not a Bundle, naming the field', () => {
    expect(refusal({ resourceType: 'Patient' })[0].field).toBe('resourceType');
    expect(refusal({ ...bundle(patient), type: 'searchset' })[0].field).toBe('type');
  });
});
