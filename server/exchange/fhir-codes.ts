// The codes a Plumbline FHIR Bundle uses, in one place, for the Bundle built and the Bundle read.

/**
 * Plumbline's own code system and extensions. The `.invalid` top-level name is reserved and never
 * resolves, so these addresses cannot collide with anyone else's; they name, they do not link.
 */
export const PLUMBLINE_BASE = 'https://plumbline.invalid/fhir';
export const PLUMBLINE_CODES = `${PLUMBLINE_BASE}/CodeSystem/plumbline`;
export const PRE_ALERT_ID_SYSTEM = `${PLUMBLINE_BASE}/NamingSystem/pre-alert-id`;
export const HOSPITAL_SYSTEM = `${PLUMBLINE_BASE}/NamingSystem/hospital`;
export const UNIT_SYSTEM = `${PLUMBLINE_BASE}/NamingSystem/unit`;
export const CASE_SYSTEM = `${PLUMBLINE_BASE}/NamingSystem/case`;
export const AGE_EXTENSION = `${PLUMBLINE_BASE}/StructureDefinition/age`;
export const ETA_EXTENSION = `${PLUMBLINE_BASE}/StructureDefinition/eta-minutes`;
export const NOTES_EXTENSION = `${PLUMBLINE_BASE}/StructureDefinition/notes`;
export const SOURCE_EXTENSION = `${PLUMBLINE_BASE}/StructureDefinition/source`;

export const LOINC = 'http://loinc.org';
export const UCUM = 'http://unitsofmeasure.org';
export const OBSERVATION_CATEGORY = 'http://terminology.hl7.org/CodeSystem/observation-category';
export const ACT_CODE = 'http://terminology.hl7.org/CodeSystem/v3-ActCode';
/**
 * NEMSIS publishes its values as codes of data elements, not as a FHIR code system; this address
 * is Plumbline's way of naming the element a code belongs to (from memory: check it against
 * NEMSIS's FHIR guidance before a registry relies on it). The codes themselves come from the
 * criteria sets, which cite NEMSIS v3.5.1.
 */
export const nemsisSystem = (element: string) => `http://nemsis.org/v3.5.1/${element}`;

/**
 * The vital signs, LOINC-coded. From memory: check each code against the LOINC table before use
 * (8480-6 systolic blood pressure, 8867-4 heart rate, 9279-1 respiratory rate, 59408-5 oxygen
 * saturation by pulse oximetry, 9269-2 Glasgow coma score total with 9267-6 eye, 9270-0 verbal
 * and 9268-4 motor; 29463-7 body weight; 49051-6 gestational age in weeks).
 */
export const VITAL_CODES = {
  sbp: { code: '8480-6', display: 'Systolic blood pressure', unit: 'mm[Hg]', unitText: 'mmHg' },
  hr: { code: '8867-4', display: 'Heart rate', unit: '/min', unitText: 'beats/minute' },
  rr: { code: '9279-1', display: 'Respiratory rate', unit: '/min', unitText: 'breaths/minute' },
  spo2: { code: '59408-5', display: 'Oxygen saturation in Arterial blood by Pulse oximetry', unit: '%', unitText: '%' },
} as const;
export const GCS_CODES = {
  total: { code: '9269-2', display: 'Glasgow coma score total' },
  eye: { code: '9267-6', display: 'Glasgow coma score eye opening' },
  verbal: { code: '9270-0', display: 'Glasgow coma score verbal' },
  motor: { code: '9268-4', display: 'Glasgow coma score motor' },
} as const;
export const WEIGHT_CODE = { code: '29463-7', display: 'Body weight' } as const;
export const GESTATION_CODE = { code: '49051-6', display: 'Gestational age in weeks' } as const;

/** Plumbline's own codes: what LOINC has no single code for, and the results of the evaluation. */
export const OWN = {
  fall: 'fall',
  fallHeight: 'fall-height',
  fallSurface: 'fall-surface',
  firstImpact: 'fall-first-impact',
  headImpact: 'fall-head-impact',
  spo2RoomAir: 'spo2-room-air',
  anticoagulant: 'anticoagulant',
  intubated: 'intubated',
  respiratorySupport: 'respiratory-support',
  respiratoryDistress: 'respiratory-distress',
  finding: 'injury-finding',
  consideration: 'special-consideration',
  fieldRisk: 'field-risk',
  criterion: 'field-triage-criterion',
  activation: 'trauma-team-activation',
  recommendedLevel: 'recommended-level',
  decidedLevel: 'decided-level',
  decidedReason: 'decided-reason',
} as const;

/** Plumbline codes that are results of the evaluation: a Bundle sent in may carry them; they are recomputed, never read. */
export const RESULT_CODES: ReadonlySet<string> = new Set([OWN.fieldRisk, OWN.criterion, OWN.activation]);

export const FLAG_CODES = [
  ['anticoagulant', OWN.anticoagulant],
] as const;
export const VITAL_FLAG_CODES = [
  ['intubated', OWN.intubated],
  ['respiratorySupport', OWN.respiratorySupport],
  ['respiratoryDistress', OWN.respiratoryDistress],
] as const;
