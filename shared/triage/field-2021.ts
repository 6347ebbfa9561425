import type { Condition, CriteriaSet, Criterion } from './criteria';

// Every criterion below, its source, its mark and its NEMSIS code: SOURCES.md §2.
const SOURCE = '2021 National Guideline for the Field Triage of Injured Patients, Newgard CD et al., J Trauma Acute Care Surg 2022 [source]';
const LOW_LEVEL_SOURCE = `${SOURCE}; "low-level" taken as a fall of 10 ft (3.048 m) or less, standing included [ours]`;
const SOURCE_LABEL = '2021 field-triage guideline (Newgard 2022)';

type Entry = Omit<Criterion, 'set' | 'source' | 'nemsis'> & { source?: string; nemsis?: Criterion['nemsis'] };

const finding = (id: string, f: Extract<Condition, { kind: 'finding' }>['finding'], label: string): Entry => ({
  id: `field-2021:${id}`, category: 'anatomic', tier: 'high', label, when: { kind: 'finding', finding: f },
});

const entries: Entry[] = [
  // High risk: injury patterns [source: Newgard 2022]
  finding('penetrating-injury', 'penetrating-head-neck-torso-proximal-limb', 'Penetrating injury to head, neck, torso or proximal limb'),
  finding('skull-deformity', 'skull-deformity', 'Skull deformity or suspected fracture'),
  finding('spinal-injury-deficit', 'spinal-injury-deficit', 'Suspected spinal injury with new motor or sensory loss'),
  finding('chest-wall-instability', 'chest-wall-instability', 'Chest wall instability, deformity or suspected flail chest'),
  finding('pelvic-fracture', 'pelvic-fracture', 'Suspected pelvic fracture'),
  finding('two-proximal-long-bone-fractures', 'two-proximal-long-bone-fractures', 'Suspected fracture of two or more proximal long bones'),
  finding('mangled-extremity', 'mangled-extremity', 'Crushed, degloved, mangled or pulseless limb'),
  finding('amputation-proximal', 'amputation-proximal', 'Amputation proximal to wrist or ankle'),
  finding('bleeding-tourniquet-packing', 'bleeding-tourniquet-packing', 'Active bleeding needing a tourniquet or wound packing'),

  // High risk: mental status and vital signs, all ages [source: Newgard 2022]
  {
    id: 'field-2021:motor-gcs-below-6', category: 'physiologic', tier: 'high',
    label: 'Unable to follow commands (motor GCS < 6)',
    when: { kind: 'below', quantity: 'gcsMotor', value: 6 },
  },
  {
    id: 'field-2021:rr-out-of-range', category: 'physiologic', tier: 'high',
    label: 'Respiratory rate < 10 or > 29 per minute',
    when: { kind: 'any', of: [{ kind: 'below', quantity: 'rr', value: 10 }, { kind: 'above', quantity: 'rr', value: 29 }] },
  },
  {
    id: 'field-2021:respiratory-distress-or-support', category: 'physiologic', tier: 'high',
    label: 'Respiratory distress or need for respiratory support',
    // An intubated patient is on respiratory support [ours: reading of the guideline].
    when: {
      kind: 'any',
      of: [{ kind: 'flag', flag: 'respiratoryDistress' }, { kind: 'flag', flag: 'respiratorySupport' }, { kind: 'flag', flag: 'intubated' }],
    },
  },
  {
    id: 'field-2021:room-air-spo2-below-90', category: 'physiologic', tier: 'high',
    label: 'Room-air pulse oximetry < 90 %',
    // Below 90 % on oxygen meets it; 90 % or more on oxygen leaves it unknown (SOURCES.md §2.4) [ours].
    when: { kind: 'room-air-spo2-below', value: 90 },
  },
  // Age bands in completed years: "age 0–9" ends at the tenth birthday, and 70 + 2 × age takes
  // completed years at a fractional age (SOURCES.md §2.5) [ours: reading of the bands].
  {
    id: 'field-2021:sbp-low-age-0-9', category: 'physiologic', tier: 'high',
    label: 'Age 0–9: SBP < 70 + 2 × age',
    when: {
      kind: 'all',
      of: [{ kind: 'age', below: 10, label: '0–9' }, { kind: 'below', quantity: 'sbp', value: 70, perYearOfAge: 2 }],
    },
  },
  {
    id: 'field-2021:sbp-below-90-age-10-64', category: 'physiologic', tier: 'high',
    label: 'Age 10–64: SBP < 90',
    when: { kind: 'all', of: [{ kind: 'age', from: 10, below: 65, label: '10–64' }, { kind: 'below', quantity: 'sbp', value: 90 }] },
  },
  {
    id: 'field-2021:sbp-below-110-age-65-up', category: 'physiologic', tier: 'high',
    label: 'Age 65 or older: SBP < 110',
    when: { kind: 'all', of: [{ kind: 'age', from: 65, label: '65 or older' }, { kind: 'below', quantity: 'sbp', value: 110 }] },
  },
  {
    // HR > SBP applies from age 10 up only [source: Newgard 2022].
    id: 'field-2021:hr-above-sbp-age-10-up', category: 'physiologic', tier: 'high',
    label: 'Age 10 or older: heart rate above SBP',
    when: { kind: 'all', of: [{ kind: 'age', from: 10, label: '10 or older' }, { kind: 'exceeds', quantity: 'hr', other: 'sbp' }] },
  },

  // Moderate risk: mechanism [source: Newgard 2022; code: NEMSIS v3.5.1 eInjury.04]
  {
    id: 'field-2021:fall-above-10-ft', category: 'mechanism', tier: 'moderate',
    label: 'Fall from height > 10 feet (3.048 m)',
    nemsis: { element: 'eInjury.04', code: '2904031' },
    when: { kind: 'above', quantity: 'heightM', value: 3.048, display: '3.048 m (10 ft)' },
  },

  // Moderate risk: EMS judgment [source: Newgard 2022]
  {
    id: 'field-2021:low-level-fall-head-impact', category: 'special', tier: 'moderate',
    label: 'Low-level fall with head impact, age 5 or under or 65 or older',
    source: LOW_LEVEL_SOURCE,
    nemsis: { element: 'eInjury.04', code: '2904033' },
    when: {
      kind: 'all',
      of: [
        { kind: 'any', of: [{ kind: 'age', below: 6, label: '5 or under' }, { kind: 'age', from: 65, label: '65 or older' }] },
        { kind: 'at-most', quantity: 'heightM', value: 3.048, display: '3.048 m (10 ft)' },
        { kind: 'flag', flag: 'headImpact' },
      ],
    },
  },
  {
    id: 'field-2021:anticoagulant', category: 'special', tier: 'moderate',
    label: 'Anticoagulant use', when: { kind: 'flag', flag: 'anticoagulant' },
  },
  {
    id: 'field-2021:suspected-abuse', category: 'special', tier: 'moderate',
    label: 'Suspected child abuse', when: { kind: 'consideration', consideration: 'suspected-abuse' },
  },
  {
    id: 'field-2021:high-resource-needs', category: 'special', tier: 'moderate',
    label: 'Special, high-resource health-care needs', when: { kind: 'consideration', consideration: 'high-resource-needs' },
  },
  {
    id: 'field-2021:pregnancy-above-20-weeks', category: 'special', tier: 'moderate',
    label: 'Pregnancy > 20 weeks', when: { kind: 'pregnancy-above', weeks: 20 },
  },
  {
    id: 'field-2021:burns', category: 'special', tier: 'moderate',
    label: 'Burns in conjunction with trauma', when: { kind: 'consideration', consideration: 'burns' },
  },
  {
    id: 'field-2021:ems-concern', category: 'special', tier: 'moderate',
    label: 'EMS judgment: crew concern', when: { kind: 'consideration', consideration: 'ems-concern' },
  },
];

export const FIELD_2021: CriteriaSet = {
  id: 'field-2021',
  name: '2021 national field-triage guideline',
  source: SOURCE,
  criteria: entries.map((e) => ({
    ...e, set: 'field-2021', source: e.source ?? SOURCE, sourceLabel: SOURCE_LABEL, nemsis: e.nemsis ?? null,
  })),
};
