// Inputs whose absence can change a result, each with a fixed sentence. Entries are frozen and
// shared between results, so listing them costs no allocation.

export interface MissingInput {
  readonly field: string;
  readonly message: string;
}

export const MISSING_INPUTS: readonly MissingInput[] = [
  { field: 'vitals.sbp', message: 'no systolic pressure recorded' },
  { field: 'vitals.hr', message: 'no heart rate recorded' },
  { field: 'vitals.rr', message: 'no respiratory rate recorded' },
  { field: 'vitals.spo2', message: 'no SpO2 recorded' },
  { field: 'vitals.spo2RoomAir', message: 'not recorded whether the SpO2 was taken on room air' },
  { field: 'vitals.spo2', message: 'no room-air SpO2 recorded (a reading of 90 % or more on oxygen cannot show it)' },
  { field: 'vitals.gcs', message: 'no GCS recorded' },
  { field: 'vitals.gcs.eye', message: 'no GCS eye score recorded' },
  { field: 'vitals.gcs.verbal', message: 'no GCS verbal score recorded' },
  { field: 'vitals.gcs.motor', message: 'no GCS motor score recorded (a total alone cannot show it)' },
  { field: 'vitals.intubated', message: 'not recorded whether the patient is intubated' },
  { field: 'vitals.respiratorySupport', message: 'not recorded whether the patient needs respiratory support' },
  { field: 'vitals.respiratoryDistress', message: 'not recorded whether the patient is in respiratory distress' },
  { field: 'fall.headImpact', message: 'not recorded whether the head struck' },
  { field: 'anticoagulant', message: 'anticoagulant use not recorded' },
  { field: 'pregnancyWeeks', message: 'pregnancy not recorded' },
  { field: 'bodyHeightCm', message: "no child's height recorded, and none can be estimated without an age under 15" },
].map((entry) => Object.freeze(entry));

/**
 * Bits by field. vitals.spo2 appears twice: the first when no SpO2 is recorded, the second
 * (`vitals.spo2@room-air`) when a reading on oxygen cannot show the room-air value.
 */
export const MISSING_BIT = Object.fromEntries(MISSING_INPUTS.map((m, i) => [
  m.field === 'vitals.spo2' && m.message.startsWith('no room-air') ? 'vitals.spo2@room-air' : m.field,
  1 << i,
])) as Record<string, number>;
