import { CRITERION_CATALOG, findCriterion, plainSource, type CatalogEntry } from '../../../shared/triage/catalog';
import { LEVEL_IDS, type LevelId, type Policy } from '../../../shared/triage/policy';
import type { SaveDraft } from '../../../shared/schemas/policies';

// The form edits a policy as one criteria list per level, from full down; the engine's rule list
// is rebuilt from it in that order, so a person can never put a lower level above a higher one.

export type CallingLevel = Exclude<LevelId, 'none'>;
export const CALLING_LEVELS = LEVEL_IDS.filter((id): id is CallingLevel => id !== 'none');

export interface LevelForm {
  id: LevelId;
  name: string;
  criteria: string[];
  note: string;
}

export interface PolicyForm {
  name: string;
  note: string;
  levels: LevelForm[];
}

export function toForm(policy: Policy): PolicyForm {
  return {
    name: policy.name,
    note: policy.note ?? '',
    levels: LEVEL_IDS.map((id) => {
      const rules = policy.rules.filter((rule) => rule.level === id);
      return {
        id,
        name: policy.levels.find((level) => level.id === id)?.name ?? id,
        criteria: [...new Set(rules.flatMap((rule) => rule.criteria))],
        note: rules.find((rule) => rule.note)?.note ?? '',
      };
    }),
  };
}

export function fromForm(form: PolicyForm): SaveDraft {
  return {
    name: form.name,
    note: form.note || undefined,
    levels: form.levels.map(({ id, name }) => ({ id, name })),
    rules: CALLING_LEVELS.flatMap((level) => {
      const entry = form.levels.find((l) => l.id === level);
      if (!entry || entry.criteria.length === 0) return [];
      return [{ level, criteria: entry.criteria, ...(entry.note ? { note: entry.note } : {}) }];
    }),
  };
}

const SET_NAMES: Record<CatalogEntry['set'], string> = { 'field-2021': '2021 guideline', 'field-2011': '2011 guideline', policy: 'Policy condition' };
const CATEGORY_NAMES: Record<CatalogEntry['category'], string> = { physiologic: 'Vital signs and consciousness', anatomic: 'Injuries found', mechanism: 'How the fall happened', special: 'Special considerations' };

export const setName = (set: CatalogEntry['set']) => SET_NAMES[set];

export function describeCriterion(id: string): { label: string; source: string; set: string } {
  const entry = findCriterion(id);
  return entry ? { label: entry.label, source: plainSource(entry), set: SET_NAMES[entry.set] } : { label: id, source: 'not in the criteria catalog', set: 'unknown' };
}

/** The catalog grouped for the picker, leaving out what the level already names. */
export function catalogGroups(exclude: readonly string[]) {
  return (Object.keys(CATEGORY_NAMES) as CatalogEntry['category'][]).map((category) => ({
    label: CATEGORY_NAMES[category],
    items: CRITERION_CATALOG.filter((c) => c.category === category && !exclude.includes(c.id)).map((c) => ({ value: c.id, label: `${c.label} (${SET_NAMES[c.set]})` })),
  })).filter((group) => group.items.length > 0);
}

export interface LevelDiff {
  id: LevelId;
  nameBefore: string | null;
  nameAfter: string | null;
  added: string[];
  removed: string[];
  kept: string[];
}

/** Per level, what the second version adds to and removes from the first. */
export function diffPolicies(a: Policy, b: Policy): LevelDiff[] {
  const fa = toForm(a);
  const fb = toForm(b);
  return LEVEL_IDS.map((id) => {
    const la = fa.levels.find((l) => l.id === id)!;
    const lb = fb.levels.find((l) => l.id === id)!;
    const inA = a.levels.some((l) => l.id === id);
    const inB = b.levels.some((l) => l.id === id);
    return {
      id,
      nameBefore: inA ? la.name : null,
      nameAfter: inB ? lb.name : null,
      added: lb.criteria.filter((c) => !la.criteria.includes(c)),
      removed: la.criteria.filter((c) => !lb.criteria.includes(c)),
      kept: la.criteria.filter((c) => lb.criteria.includes(c)),
    };
  });
}
