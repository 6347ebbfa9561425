import { levelCalled } from '../../../shared/triage/loosening';
import { readBack } from '../../../shared/triage/local-criteria';
import type { Policy } from '../../../shared/triage/policy';

/** A tried version's own criteria as the what-if shows them beside its figures. */
export function localCriteriaRead(policy: Policy): { label: string; sentence: string; level: string }[] {
  return (policy.localCriteria ?? []).map((c) => {
    const level = levelCalled(policy, c.id);
    return { label: c.label, sentence: readBack(c.condition), level: policy.levels.find((l) => l.id === level)?.name ?? level };
  });
}
