import type { Condition, CriteriaSet, Criterion } from './criteria';

// Every criterion below, its source, its mark and the readings taken: SOURCES.md §3.
const SOURCE = '2011 CDC field-triage guideline, Sasser SM et al., MMWR Recomm Rep 2012;61(RR-1) [source]';
const SOURCE_LABEL = '2011 field-triage guideline (Sasser 2012)';

type Entry = Omit<Criterion, 'set' | 'source' | 'nemsis'> & { source?: string };

const finding = (id: string, f: Extract<Condition, { kind: 'finding' }>['finding'], label: string, note?: string): Entry => ({
  id: `field-2011:${id}`, category: 'anatomic', tier: 'high', label, when: { kind: 'finding', finding: f }, ...(note ? { note } : {}),
});

// fieldRisk for this set [ours, SOURCES.md §3]: steps 1–2 → high, steps 3–4 → moderate.
const entries: Entry[] = [
  // Step 1, physiologic [source: Sasser 2012]
  {
    id: 'field-2011:gcs-13-or-less', category: 'physiologic', tier: 'high',
    label: 'GCS 13 or less',
    when: { kind: 'at-most', quantity: 'gcsTotal', value: 13 },
  },
  {
    id: 'field-2011:sbp-below-90', category: 'physiologic', tier: 'high',
    label: 'SBP < 90', when: { kind: 'below', quantity: 'sbp', value: 90 },
  },
  {
    id: 'field-2011:rr-out-of-range', category: 'physiologic', tier: 'high',
    label: 'Respiratory rate < 10 or > 29 (< 20 under 1 year)',
    // Under 1 year the floor is 20; > 29 is not applied there, as infants breathe faster than that
    // when well (SOURCES.md §3.1) [ours: reading of the guideline's parenthesis].
    when: {
      kind: 'any',
      of: [
        { kind: 'all', of: [{ kind: 'age', below: 1, label: 'under 1 year' }, { kind: 'below', quantity: 'rr', value: 20 }] },
        {
          kind: 'all',
          of: [
            { kind: 'age', from: 1, label: '1 year or older' },
            { kind: 'any', of: [{ kind: 'below', quantity: 'rr', value: 10 }, { kind: 'above', quantity: 'rr', value: 29 }] },
          ],
        },
      ],
    },
  },
  {
    id: 'field-2011:ventilatory-support', category: 'physiologic', tier: 'high',
    label: 'Need for ventilatory support',
    when: { kind: 'any', of: [{ kind: 'flag', flag: 'respiratorySupport' }, { kind: 'flag', flag: 'intubated' }] },
  },

  // Step 2, anatomic [source: Sasser 2012]
  finding('penetrating-injury', 'penetrating-head-neck-torso-proximal-limb', 'Penetrating injury to head, neck, torso or limb above elbow or knee'),
  finding('chest-wall-instability', 'chest-wall-instability', 'Chest wall instability or deformity'),
  finding('two-proximal-long-bone-fractures', 'two-proximal-long-bone-fractures', 'Two or more proximal long-bone fractures'),
  finding('mangled-extremity', 'mangled-extremity', 'Crushed, degloved, mangled or pulseless extremity'),
  finding('amputation-proximal', 'amputation-proximal', 'Amputation proximal to wrist or ankle'),
  finding('pelvic-fracture', 'pelvic-fracture', 'Pelvic fractures'),
  finding('open-or-depressed-skull-fracture', 'skull-deformity', 'Open or depressed skull fracture',
    'Read from the skull-deformity finding, which includes a suspected skull fracture (SOURCES.md §3.2) [ours].'),
  finding('paralysis', 'spinal-injury-deficit', 'Paralysis',
    'Read from the spinal-injury-with-deficit finding, so a sensory-only loss counts too (SOURCES.md §3.2) [ours].'),

  // Step 3, mechanism: falls; one storey = 10 ft [source: Sasser 2012]
  {
    id: 'field-2011:fall-adult-above-20-ft', category: 'mechanism', tier: 'moderate',
    label: 'Adult (15 or older): fall > 20 feet',
    when: {
      kind: 'all',
      of: [{ kind: 'age', from: 15, label: '15 or older' }, { kind: 'above', quantity: 'heightM', value: 6.096, display: '6.096 m (20 ft)' }],
    },
  },
  {
    id: 'field-2011:fall-child-above-10-ft', category: 'mechanism', tier: 'moderate',
    label: "Child (under 15): fall > 10 feet or more than twice the child's height",
    // "Two to three times the height of the child": fired at twice, the conservative end [ours];
    // the height recorded, else estimated from age (SOURCES.md §3.4, §4).
    note: "The child's height is the crew's, or estimated from age from a growth reference and shown as an estimate.",
    when: {
      kind: 'all',
      of: [
        { kind: 'age', below: 15, label: 'under 15' },
        {
          kind: 'any',
          of: [
            { kind: 'above', quantity: 'heightM', value: 3.048, display: '3.048 m (10 ft)' },
            { kind: 'fall-above-body-heights', times: 2 },
          ],
        },
      ],
    },
  },

  // Step 4, special considerations [source: Sasser 2012]
  {
    id: 'field-2011:age-above-55', category: 'special', tier: 'moderate',
    label: 'Older adult: over 55',
    // "After 55" read as from the 56th birthday (SOURCES.md §3.3) [ours].
    note: 'The guideline says the risk of injury or death rises after 55; it is a consideration, not a threshold of injury.',
    when: { kind: 'age', from: 56, label: 'over 55' },
  },
  {
    id: 'field-2011:sbp-below-110-age-65-up', category: 'special', tier: 'moderate',
    label: 'Over 65: SBP < 110 may be shock',
    // "after age 65": 65 itself counts, matching the 2021 band [ours].
    when: { kind: 'all', of: [{ kind: 'age', from: 65, label: '65 or older' }, { kind: 'below', quantity: 'sbp', value: 110 }] },
  },
  {
    id: 'field-2011:anticoagulant', category: 'special', tier: 'moderate',
    label: 'Anticoagulants or bleeding disorder', when: { kind: 'flag', flag: 'anticoagulant' },
  },
  {
    id: 'field-2011:burns', category: 'special', tier: 'moderate',
    label: 'Burns', when: { kind: 'consideration', consideration: 'burns' },
  },
  {
    id: 'field-2011:pregnancy-above-20-weeks', category: 'special', tier: 'moderate',
    label: 'Pregnancy > 20 weeks', when: { kind: 'pregnancy-above', weeks: 20 },
  },
  {
    id: 'field-2011:ems-judgement', category: 'special', tier: 'moderate',
    label: 'EMS provider judgment', when: { kind: 'consideration', consideration: 'ems-concern' },
  },
];

export const FIELD_2011: CriteriaSet = {
  id: 'field-2011',
  name: '2011 CDC field-triage guideline (superseded)',
  source: SOURCE,
  criteria: entries.map((e) => ({ ...e, set: 'field-2011', source: e.source ?? SOURCE, sourceLabel: SOURCE_LABEL, nemsis: null })),
};
