import { createHash } from 'node:crypto';
import type { CaseEventView, CaseState, CaseSummary } from '../../shared/schemas/cases';
import type { ClinicalInput } from '../../shared/schemas/clinical';
import { gcsTotalOf } from '../../shared/schemas/units';
import {
  ACT_CODE, AGE_EXTENSION, CASE_SYSTEM, ETA_EXTENSION, GCS_CODES, GESTATION_CODE, HOSPITAL_SYSTEM, LOINC, NOTES_EXTENSION,
  OBSERVATION_CATEGORY, OWN, PLUMBLINE_CODES, PRE_ALERT_ID_SYSTEM, SOURCE_EXTENSION, UCUM, UNIT_SYSTEM, VITAL_CODES, VITAL_FLAG_CODES,
  WEIGHT_CODE, nemsisSystem,
} from './fhir-codes';

/** A FHIR resource as JSON: the resource type, its id, and whatever else the type holds. */
export type FhirResource = { resourceType: string; id: string } & Record<string, unknown>;

export interface FhirBundle {
  resourceType: 'Bundle';
  id: string;
  meta: { lastUpdated: string };
  identifier: { system: string; value: string };
  type: 'collection';
  timestamp: string;
  entry: Array<{ fullUrl: string; resource: FhirResource }>;
}

/** A stable UUID for one resource of one case, so a case exported twice names its resources the same way. */
function resourceId(caseId: number, name: string): string {
  const hex = createHash('sha256').update(`plumbline:case:${caseId}:${name}`).digest('hex');
  return `${hex.slice(0, 8)}-${hex.slice(8, 12)}-5${hex.slice(13, 16)}-${((parseInt(hex[16], 16) & 0x3) | 0x8).toString(16)}${hex.slice(17, 20)}-${hex.slice(20, 32)}`;
}

const iso = (ms: number) => new Date(ms).toISOString();
const own = (code: string, display?: string) => ({ coding: [{ system: PLUMBLINE_CODES, code, ...(display ? { display } : {}) }] });
const loinc = (code: string, display: string) => ({ coding: [{ system: LOINC, code, display }], text: display });
const quantity = (value: number, unit: string, code: string) => ({ value, unit, system: UCUM, code });

// A pre-alert's status: the crew reports before anyone examines the patient in hospital.
const ENCOUNTER_STATUS: Record<CaseState, string> = {
  'en-route': 'planned',
  acknowledged: 'planned',
  arrived: 'arrived',
  closed: 'finished',
  cancelled: 'cancelled',
};

/** Every resource of one case, referring to each other as `Type/id` (the Bulk Data way). */
export function caseResources(summary: CaseSummary, events: CaseEventView[]): FhirResource[] {
  const idOf = (name: string) => resourceId(summary.id, name);
  const patientId = idOf('patient');
  const encounterId = idOf('encounter');
  const patientRef = { reference: `Patient/${patientId}` };
  const encounterRef = { reference: `Encounter/${encounterId}` };
  const input = summary.latest.input;
  const result = summary.latest.result;
  const effective = iso(summary.latest.createdAt);
  const observations: FhirResource[] = [];

  function observation(name: string, code: object, value: Record<string, unknown>, extra: Record<string, unknown> = {}, vital = false): FhirResource {
    const resource: FhirResource = {
      resourceType: 'Observation',
      id: idOf(`observation:${name}`),
      status: 'preliminary',
      ...(vital ? { category: [{ coding: [{ system: OBSERVATION_CATEGORY, code: 'vital-signs', display: 'Vital Signs' }] }] } : {}),
      code,
      subject: patientRef,
      encounter: encounterRef,
      effectiveDateTime: effective,
      ...value,
      ...extra,
    };
    observations.push(resource);
    return resource;
  }

  const patient: FhirResource = {
    resourceType: 'Patient',
    id: patientId,
    // Pseudonymous: the case's number, never a name.
    identifier: [{ system: CASE_SYSTEM, value: summary.caseNumber }],
    extension: [{ url: AGE_EXTENSION, valueAge: quantity(input.ageYears, 'years', 'a') }],
    gender: input.sex ?? 'unknown',
  };

  const extensions: Array<Record<string, unknown>> = [];
  if (summary.etaAt != null && summary.latest.etaMinutes != null) extensions.push({ url: ETA_EXTENSION, valueInteger: summary.latest.etaMinutes });
  if (summary.latest.notes) extensions.push({ url: NOTES_EXTENSION, valueString: summary.latest.notes });
  if (summary.source) extensions.push({ url: SOURCE_EXTENSION, valueString: summary.source });
  const encounter: FhirResource = {
    resourceType: 'Encounter',
    id: encounterId,
    ...(extensions.length ? { extension: extensions } : {}),
    identifier: [{ system: PRE_ALERT_ID_SYSTEM, value: summary.clientId }],
    status: ENCOUNTER_STATUS[summary.state],
    class: { system: ACT_CODE, code: 'EMER', display: 'emergency' },
    subject: patientRef,
    period: { start: iso(summary.createdAt), ...(summary.closedAt ? { end: iso(summary.closedAt) } : {}) },
    serviceProvider: { identifier: { system: HOSPITAL_SYSTEM, value: String(summary.hospital.id) }, display: summary.hospital.name },
    ...(summary.unit
      ? { hospitalization: { origin: { identifier: { system: UNIT_SYSTEM, value: String(summary.unit.id) }, display: `${summary.unit.callSign}, ${summary.agency.name}` } } }
      : { hospitalization: { origin: { display: summary.agency.name } } }),
  };

  clinicalObservations(input, observation);

  const fieldRisk = observation('field-risk', own(OWN.fieldRisk, 'Field triage risk'), { valueCodeableConcept: own(result.fieldRisk) }, { method: own(result.set) });
  const criteria = result.criteria.map((criterion, i) => {
    const codings: Array<Record<string, string>> = [{ system: PLUMBLINE_CODES, code: criterion.id, display: criterion.label }];
    if (criterion.nemsis) codings.push({ system: nemsisSystem(criterion.nemsis.element), code: criterion.nemsis.code });
    return observation(`criterion:${i}`, own(OWN.criterion, 'Field triage criterion met'), { valueCodeableConcept: { coding: codings, text: criterion.label } }, { note: [{ text: `${criterion.because}. Source: ${criterion.source}` }] });
  });
  fieldRisk.hasMember = criteria.map((c) => ({ reference: `Observation/${c.id}` }));

  const decided = summary.decidedLevel;
  observation(
    'activation',
    own(OWN.activation, 'Trauma team activation'),
    { valueCodeableConcept: { ...own(decided ?? summary.recommendedLevel), text: decided ? 'decided' : 'recommended, not yet decided' } },
    {
      status: decided ? 'final' : 'preliminary',
      derivedFrom: [{ reference: `Observation/${fieldRisk.id}` }],
      component: [
        { code: own(OWN.recommendedLevel), valueCodeableConcept: { ...own(summary.recommendedLevel), text: result.activationName } },
        ...(decided ? [{ code: own(OWN.decidedLevel), valueCodeableConcept: own(decided) }] : []),
        ...(summary.decidedReason ? [{ code: own(OWN.decidedReason), valueString: summary.decidedReason }] : []),
      ],
      ...(summary.decidedBy ? { performer: [{ display: summary.decidedBy }] } : {}),
      ...(summary.decidedAt ? { issued: iso(summary.decidedAt) } : {}),
    },
  );

  const targets = [patient, encounter, ...observations].map((r) => ({ reference: `${r.resourceType}/${r.id}` }));
  const provenance: FhirResource[] = events.map((event) => ({
    resourceType: 'Provenance',
    id: idOf(`provenance:${event.id}`),
    target: event.kind === 'received' ? targets : [encounterRef],
    occurredDateTime: iso(event.at),
    recorded: iso(event.at),
    activity: { coding: [{ system: PLUMBLINE_CODES, code: `case-${event.kind}`, display: event.kind }] },
    agent: [
      {
        ...(event.actorRole ? { role: [{ coding: [{ system: PLUMBLINE_CODES, code: `role-${event.actorRole}`, display: event.actorRole }] }] } : {}),
        who: { display: event.actor ?? 'Plumbline' },
      },
    ],
  }));

  return [patient, encounter, ...observations, ...provenance];
}

type Emit = (name: string, code: object, value: Record<string, unknown>, extra?: Record<string, unknown>, vital?: boolean) => FhirResource;

/** The clinical part of a pre-alert as Observations; `readClinical` in fhir-in.ts reads them back. */
function clinicalObservations(input: ClinicalInput, observation: Emit): void {
  const vitals = input.vitals ?? {};
  for (const key of ['sbp', 'hr', 'rr', 'spo2'] as const) {
    const value = vitals[key];
    if (value == null) continue;
    const c = VITAL_CODES[key];
    const components = key === 'spo2' && vitals.spo2RoomAir != null ? { component: [{ code: own(OWN.spo2RoomAir, 'Measured on room air'), valueBoolean: vitals.spo2RoomAir }] } : {};
    observation(key, loinc(c.code, c.display), { valueQuantity: quantity(value, c.unitText, c.unit) }, components, true);
  }
  const total = vitals.gcsTotal ?? gcsTotalOf(vitals.gcs);
  const parts = (['eye', 'verbal', 'motor'] as const).filter((part) => vitals.gcs?.[part] != null);
  if (total != null || parts.length) {
    observation(
      'gcs',
      loinc(GCS_CODES.total.code, GCS_CODES.total.display),
      total != null ? { valueQuantity: { value: total, unit: 'score', system: UCUM, code: '{score}' } } : { dataAbsentReason: { coding: [{ system: 'http://terminology.hl7.org/CodeSystem/data-absent-reason', code: 'unknown' }] } },
      parts.length ? { component: parts.map((part) => ({ code: loinc(GCS_CODES[part].code, GCS_CODES[part].display), valueQuantity: { value: vitals.gcs![part]!, unit: 'score', system: UCUM, code: '{score}' } })) } : {},
      true,
    );
  }
  for (const [key, code] of VITAL_FLAG_CODES) if (vitals[key] != null) observation(code, own(code), { valueBoolean: vitals[key] });
  if (input.anticoagulant != null) observation(OWN.anticoagulant, own(OWN.anticoagulant, 'Takes an anticoagulant'), { valueBoolean: input.anticoagulant });
  if (input.weightKg != null) observation('weight', loinc(WEIGHT_CODE.code, WEIGHT_CODE.display), { valueQuantity: quantity(input.weightKg, 'kg', 'kg') }, {}, true);
  if (input.pregnancyWeeks != null) observation('gestation', loinc(GESTATION_CODE.code, GESTATION_CODE.display), { valueQuantity: quantity(input.pregnancyWeeks, 'weeks', 'wk') });

  const fall = input.fall;
  observation('fall', own(OWN.fall, 'Fall'), {}, {
    component: [
      { code: own(OWN.fallHeight, 'Fall height'), valueQuantity: quantity(fall.heightM, 'm', 'm') },
      ...(fall.surface ? [{ code: own(OWN.fallSurface, 'Landing surface'), valueCodeableConcept: own(fall.surface) }] : []),
      ...(fall.firstImpact ? [{ code: own(OWN.firstImpact, 'Body region that struck first'), valueCodeableConcept: own(fall.firstImpact) }] : []),
      ...(fall.headImpact != null ? [{ code: own(OWN.headImpact, 'Head struck'), valueBoolean: fall.headImpact }] : []),
    ],
  });
  (input.findings ?? []).forEach((finding, i) => observation(`finding:${i}`, own(OWN.finding, 'Injury finding'), { valueCodeableConcept: own(finding) }));
  (input.considerations ?? []).forEach((item, i) => observation(`consideration:${i}`, own(OWN.consideration, 'Special consideration'), { valueCodeableConcept: own(item) }));
}

/** One case as a FHIR R4 Bundle of type collection, entries addressed by their `Type/id`. */
export function caseBundle(summary: CaseSummary, events: CaseEventView[], at: number): FhirBundle {
  const resources = caseResources(summary, events);
  return {
    resourceType: 'Bundle',
    id: resourceId(summary.id, `bundle:${summary.rowVersion}`),
    meta: { lastUpdated: iso(summary.updatedAt) },
    identifier: { system: PRE_ALERT_ID_SYSTEM, value: summary.clientId },
    type: 'collection',
    timestamp: iso(at),
    // Inside a Bundle a reference names the entry's fullUrl.
    entry: resources.map((resource) => ({ fullUrl: `urn:uuid:${resource.id}`, resource: JSON.parse(JSON.stringify(resource).replace(/"reference":"[A-Za-z]+\/([0-9a-f-]{36})"/g, '"reference":"urn:uuid:$1"')) as FhirResource })),
  };
}
