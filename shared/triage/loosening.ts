import { findCriterion } from './catalog';
import { FIELD_2021 } from './field-2021';
import { LEVEL_RANK, type LevelId, type Policy } from './policy';

// A draft must not quietly loosen the criteria that guard the sickest patients: the 2021
// guideline's high-risk set, and the ACS minimum criteria for the highest activation. Each
// guarded criterion a draft removes, or calls at a lower level than the policy it replaces, is
// named; the ACS ones must call the highest level whatever the policy before did.

/**
 * The ACS minimum criteria for the highest activation as far as a pre-alert shows them, by the
 * criterion that stands for each [source: ACS Resources for Optimal Care of the Injured Patient
 * (2014), as listed by Tignanelli CJ et al. 2018; wording: memory]. Emergency physician's
 * discretion is the clinician's own choice of a higher level, not a criterion.
 */
export const ACS_MINIMUM: readonly { id: string; item: string }[] = [
  { id: 'policy:sbp-below-90-age-10-up', item: 'SBP < 90 in adults' },
  { id: 'field-2021:sbp-low-age-0-9', item: 'age-specific hypotension in children' },
  { id: 'field-2021:penetrating-injury', item: 'gunshot wound to neck, chest, abdomen or proximal limb' },
  { id: 'policy:gcs-total-below-9', item: 'GCS < 9 with a traumatic mechanism' },
  { id: 'policy:receiving-blood', item: 'receiving blood to maintain vital signs' },
  { id: 'field-2021:respiratory-distress-or-support', item: 'respiratory compromise, intubated or needing an emergency airway' },
];

export const HIGH_RISK_2021: readonly string[] = FIELD_2021.criteria.filter((c) => c.tier === 'high').map((c) => c.id);

export interface LooseningWarning {
  criterion: string;
  label: string;
  guard: '2021 high-risk' | 'ACS minimum';
  before: LevelId;
  after: LevelId;
  message: string;
}

/** The level a policy's first rule naming the criterion calls; none when no rule names it. */
export function levelCalled(policy: Pick<Policy, 'rules'>, id: string): LevelId {
  return policy.rules.find((rule) => rule.criteria.includes(id))?.level ?? 'none';
}

const levelName = (policy: Pick<Policy, 'levels'>, id: LevelId) => policy.levels.find((l) => l.id === id)?.name ?? id;

/** Every guarded criterion the draft loosens, compared with the policy it would replace. */
export function looseningWarnings(draft: Pick<Policy, 'rules' | 'levels'>, baseline: Pick<Policy, 'rules' | 'levels'>): LooseningWarning[] {
  const warnings: LooseningWarning[] = [];
  const seen = new Set<string>();
  for (const { id, item } of ACS_MINIMUM) {
    const after = levelCalled(draft, id);
    if (after === 'full') continue;
    seen.add(id);
    const label = findCriterion(id)?.label ?? id;
    warnings.push({
      criterion: id, label, guard: 'ACS minimum', before: levelCalled(baseline, id), after,
      message: `${label} (ACS minimum for the highest activation: ${item}) ${after === 'none' ? 'calls no level' : `calls ${levelName(draft, after)}, not the highest level`}`,
    });
  }
  for (const id of HIGH_RISK_2021) {
    if (seen.has(id)) continue;
    const before = levelCalled(baseline, id), after = levelCalled(draft, id);
    if (LEVEL_RANK[after] >= LEVEL_RANK[before] && after !== 'none') continue;
    const label = findCriterion(id)?.label ?? id;
    warnings.push({
      criterion: id, label, guard: '2021 high-risk', before, after,
      message: after === 'none'
        ? `${label} (2021 high-risk) is removed: it calls no level${before !== 'none' ? `, where it called ${levelName(baseline, before)}` : ''}`
        : `${label} (2021 high-risk) is loosened: it calls ${levelName(draft, after)}, where it called ${levelName(baseline, before)}`,
    });
  }
  return warnings;
}
