import type { Criterion } from './criteria';

// Conditions an activation policy may call that are not 2021 field criteria. The policy applies
// whatever set is chosen for fieldRisk, so it names its criteria by id and they are always evaluated.

const ACS = 'ACS Resources for Optimal Care of the Injured Patient (2014) minimum criteria for the highest activation, '
  + 'as listed by Tignanelli CJ et al., J Trauma Acute Care Surg 2018 [source; wording: from memory]';
// In plain words for screens; the wording is from memory, and the label says so (SOURCES.md §5).
const ACS_LABEL = 'ACS minimum criteria for the highest activation (Tignanelli 2018). This wording is from memory, not quoted from the published list.';
const OURS_LABEL = 'Example policy condition (ours), using the 2011 adult fall threshold (Sasser 2012)';

export const POLICY_CRITERIA: readonly Criterion[] = [
  {
    id: 'policy:sbp-below-90-age-10-up', set: 'policy', category: 'physiologic', tier: null, nemsis: null,
    label: 'Age 10 or older: SBP < 90', source: ACS, sourceLabel: ACS_LABEL,
    when: { kind: 'all', of: [{ kind: 'age', from: 10, label: '10 or older' }, { kind: 'below', quantity: 'sbp', value: 90 }] },
  },
  {
    id: 'policy:gcs-total-below-9', set: 'policy', category: 'physiologic', tier: null, nemsis: null,
    label: 'GCS total < 9', source: ACS, sourceLabel: ACS_LABEL,
    when: { kind: 'below', quantity: 'gcsTotal', value: 9 },
  },
  {
    id: 'policy:intubated', set: 'policy', category: 'physiologic', tier: null, nemsis: null,
    label: 'Intubated', source: ACS, sourceLabel: ACS_LABEL,
    when: { kind: 'flag', flag: 'intubated' },
  },
  {
    // The ACS item names transfer patients; a pre-alert from the scene with blood running counts too [ours].
    id: 'policy:receiving-blood', set: 'policy', category: 'special', tier: null, nemsis: null,
    label: 'Receiving blood to maintain vital signs', source: `${ACS}; extended to scene patients [ours]`, sourceLabel: ACS_LABEL,
    when: { kind: 'consideration', consideration: 'receiving-blood' },
  },
  {
    id: 'policy:fall-above-20-ft', set: 'policy', category: 'mechanism', tier: null, nemsis: null,
    label: 'Fall from height > 20 feet (6.096 m)',
    source: 'Example tiered policy [ours]; 20 ft is the 2011 adult fall threshold (Sasser 2012) [source]', sourceLabel: OURS_LABEL,
    when: { kind: 'above', quantity: 'heightM', value: 6.096, display: '6.096 m (20 ft)' },
  },
];
