import { z } from 'zod';
import { invalid, parseOr400, type FieldIssue } from '../errors';
import {
  AGE_EXTENSION, ETA_EXTENSION, GCS_CODES, GESTATION_CODE, HOSPITAL_SYSTEM, LOINC, NOTES_EXTENSION, OWN, PLUMBLINE_CODES,
  PRE_ALERT_ID_SYSTEM, RESULT_CODES, UNIT_SYSTEM, VITAL_CODES, VITAL_FLAG_CODES, WEIGHT_CODE,
} from './fhir-codes';

// The outer shape only; the values are checked afterwards by the same PreAlert schema the crew's
// screen goes through, so a Bundle is refused for exactly what a native pre-alert would be.
const Coding = z.object({ system: z.string().optional(), code: z.string().optional() });
const Concept = z.object({ coding: z.array(Coding).optional() });
const Quantity = z.object({ value: z.number({ error: 'must be a number' }) });
const Extension = z.object({ url: z.string(), valueAge: Quantity.optional(), valueInteger: z.number().optional(), valueString: z.string().optional() });
const Identifier = z.object({ system: z.string().optional(), value: z.string().optional() });
const Component = z.object({ code: Concept, valueQuantity: Quantity.optional(), valueBoolean: z.boolean().optional(), valueCodeableConcept: Concept.optional(), valueString: z.string().optional() });
const Resource = z.looseObject({
  resourceType: z.string({ error: 'must name the resource type' }),
  extension: z.array(Extension).optional(),
  identifier: z.array(Identifier).optional(),
  gender: z.string().optional(),
  code: Concept.optional(),
  valueQuantity: Quantity.optional(),
  valueBoolean: z.boolean().optional(),
  valueCodeableConcept: Concept.optional(),
  component: z.array(Component).optional(),
  serviceProvider: z.object({ identifier: Identifier.optional() }).optional(),
  hospitalization: z.object({ origin: z.object({ identifier: Identifier.optional() }).optional() }).optional(),
});
export const FhirPreAlertBundle = z.object({
  resourceType: z.literal('Bundle', { error: 'must be Bundle' }),
  identifier: Identifier.optional(),
  type: z.enum(['collection', 'transaction', 'message', 'batch', 'document'], { error: 'must be collection, transaction, message, batch or document' }),
  entry: z.array(z.object({ fullUrl: z.string().optional(), resource: Resource }), { error: 'must be a list of entries' }).min(1, { error: 'must hold a Patient, an Encounter and Observations' }),
});
export type FhirPreAlertBundle = z.infer<typeof FhirPreAlertBundle>;

type Concept = z.infer<typeof Concept>;
type Component = z.infer<typeof Component>;
const codeIn = (concept: Concept | undefined, system: string) => concept?.coding?.find((c) => c.system === system)?.code;
const idIn = (identifiers: Array<z.infer<typeof Identifier>> | undefined, system: string) => identifiers?.find((i) => i.system === system)?.value;
const numberOf = (text: string | undefined) => (text != null && /^[1-9][0-9]{0,14}$/.test(text) ? Number(text) : text);

/**
 * A FHIR Bundle of the shape `caseBundle` writes, read back into the native pre-alert's fields.
 * Results (field risk, criteria, activation) and Provenance are ignored: the server evaluates again.
 * An Observation it does not know is refused, naming the entry, rather than silently dropped.
 */
export function preAlertFromBundle(raw: unknown): Record<string, unknown> {
  const bundle = parseOr400(FhirPreAlertBundle, raw);
  const issues: FieldIssue[] = [];
  const vitals: Record<string, unknown> = {};
  const clinical: Record<string, unknown> = { vitals };
  const fall: Record<string, unknown> = {};
  const findings: string[] = [];
  const considerations: string[] = [];
  const out: Record<string, unknown> = { clientId: idIn(bundle.identifier ? [bundle.identifier] : undefined, PRE_ALERT_ID_SYSTEM), clinical };
  let patients = 0;
  let encounters = 0;

  bundle.entry.forEach(({ resource }, i) => {
    const at = `entry[${i}].resource`;
    if (resource.resourceType === 'Patient') {
      patients += 1;
      const age = resource.extension?.find((e) => e.url === AGE_EXTENSION)?.valueAge?.value;
      if (age === undefined) issues.push({ field: `${at}.extension`, message: `must carry the age extension ${AGE_EXTENSION}` });
      clinical.ageYears = age;
      if (resource.gender !== undefined) clinical.sex = resource.gender;
    } else if (resource.resourceType === 'Encounter') {
      encounters += 1;
      out.clientId ??= idIn(resource.identifier, PRE_ALERT_ID_SYSTEM);
      out.hospitalId = numberOf(idIn(resource.serviceProvider?.identifier ? [resource.serviceProvider.identifier] : undefined, HOSPITAL_SYSTEM));
      if (out.hospitalId === undefined) issues.push({ field: `${at}.serviceProvider.identifier`, message: `must name the destination hospital under ${HOSPITAL_SYSTEM}` });
      const unit = resource.hospitalization?.origin?.identifier;
      if (unit?.system === UNIT_SYSTEM) out.unitId = numberOf(unit.value);
      const eta = resource.extension?.find((e) => e.url === ETA_EXTENSION);
      if (eta) out.etaMinutes = eta.valueInteger;
      const notes = resource.extension?.find((e) => e.url === NOTES_EXTENSION);
      if (notes) out.notes = notes.valueString;
    } else if (resource.resourceType === 'Observation') {
      readObservation(resource, at);
    } else if (resource.resourceType !== 'Provenance') {
      issues.push({ field: `${at}.resourceType`, message: 'must be Patient, Encounter, Observation or Provenance' });
    }
  });

  function readObservation(resource: z.infer<typeof Resource>, at: string) {
    const loinc = codeIn(resource.code, LOINC);
    const own = codeIn(resource.code, PLUMBLINE_CODES);
    const value = resource.valueQuantity?.value;
    const vital = (Object.keys(VITAL_CODES) as Array<keyof typeof VITAL_CODES>).find((key) => VITAL_CODES[key].code === loinc);
    if (vital) {
      vitals[vital] = value ?? null;
      if (vital === 'spo2') {
        const roomAir = resource.component?.find((c) => codeIn(c.code, PLUMBLINE_CODES) === OWN.spo2RoomAir);
        if (roomAir) vitals.spo2RoomAir = roomAir.valueBoolean;
      }
    } else if (loinc === GCS_CODES.total.code) {
      const gcs: Record<string, unknown> = {};
      for (const c of resource.component ?? []) {
        const part = (['eye', 'verbal', 'motor'] as const).find((p) => GCS_CODES[p].code === codeIn(c.code, LOINC));
        if (part) gcs[part] = c.valueQuantity?.value;
      }
      if (Object.keys(gcs).length) vitals.gcs = gcs;
      // The Bundle states the total beside its parts; kept only when it says more than their sum, so a mismatch is refused.
      const sum = [gcs.eye, gcs.verbal, gcs.motor].every((n) => typeof n === 'number') ? (gcs.eye as number) + (gcs.verbal as number) + (gcs.motor as number) : null;
      if (value !== undefined && value !== sum) vitals.gcsTotal = value;
    } else if (loinc === WEIGHT_CODE.code) {
      clinical.weightKg = value;
    } else if (loinc === GESTATION_CODE.code) {
      clinical.pregnancyWeeks = value;
    } else if (own === OWN.fall) {
      const component = (code: string): Component | undefined => resource.component?.find((c) => codeIn(c.code, PLUMBLINE_CODES) === code);
      fall.heightM = component(OWN.fallHeight)?.valueQuantity?.value;
      const surface = component(OWN.fallSurface);
      if (surface) fall.surface = codeIn(surface.valueCodeableConcept, PLUMBLINE_CODES);
      const first = component(OWN.firstImpact);
      if (first) fall.firstImpact = codeIn(first.valueCodeableConcept, PLUMBLINE_CODES);
      const head = component(OWN.headImpact);
      if (head) fall.headImpact = head.valueBoolean;
      clinical.fall = fall;
    } else if (own === OWN.anticoagulant) {
      clinical.anticoagulant = resource.valueBoolean;
    } else if (own && VITAL_FLAG_CODES.some(([, code]) => code === own)) {
      vitals[VITAL_FLAG_CODES.find(([, code]) => code === own)![0]] = resource.valueBoolean;
    } else if (own === OWN.finding) {
      findings.push(codeIn(resource.valueCodeableConcept, PLUMBLINE_CODES) ?? '');
    } else if (own === OWN.consideration) {
      considerations.push(codeIn(resource.valueCodeableConcept, PLUMBLINE_CODES) ?? '');
    } else if (!own || !RESULT_CODES.has(own)) {
      issues.push({ field: `${at}.code`, message: 'is not an observation a pre-alert carries (see the Exchange section of the README)' });
    }
  }

  if (patients !== 1) issues.push({ field: 'entry', message: `must hold exactly one Patient (found ${patients})` });
  if (encounters !== 1) issues.push({ field: 'entry', message: `must hold exactly one Encounter (found ${encounters})` });
  if (out.clientId === undefined) issues.push({ field: 'identifier', message: `must carry the sender's pre-alert id under ${PRE_ALERT_ID_SYSTEM}` });
  if (!clinical.fall) issues.push({ field: 'entry', message: 'must hold the fall Observation with its height' });
  if (issues.length) throw invalid(issues);
  if (findings.length) clinical.findings = findings;
  if (considerations.length) clinical.considerations = considerations;
  return out;
}
