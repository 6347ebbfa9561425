import { CRITERION_CATALOG, findCriterion, plainSource, type CatalogEntry } from '@shared/triage/catalog';
import { LEVEL_IDS, type LevelId, type Policy } from '@shared/triage/policy';
import type { SaveDraft } from '@shared/schemas/policies';
import { levelCalled } from '@shared/triage/loosening';
import { readBack, type LocalCondition, type LocalCriterion } from '@shared/triage/local-criteria';

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

/** A hospital's own criterion in the form: its parts, the level it calls, and (once saved) its source. */
export interface LocalCriterionForm {
  id: string;
  label: string;
  reason: string;
  level: CallingLevel;
  condition: LocalCondition;
  source: string | null;
}

export interface PolicyForm {
  name: string;
  note: string;
  /** Each level's shipped criteria; the local ones are in `localCriteria` with the level they call. */
  levels: LevelForm[];
  localCriteria: LocalCriterionForm[];
}

export function localToForm(policy: Policy, c: LocalCriterion): LocalCriterionForm {
  const level = levelCalled(policy, c.id);
  return { id: c.id, label: c.label, reason: c.reason, level: level === 'none' ? 'full' : level, condition: JSON.parse(JSON.stringify(c.condition)) as LocalCondition, source: c.source };
}

export function toForm(policy: Policy): PolicyForm {
  const local = new Set((policy.localCriteria ?? []).map((c) => c.id));
  return {
    name: policy.name,
    note: policy.note ?? '',
    localCriteria: (policy.localCriteria ?? []).map((c) => localToForm(policy, c)),
    levels: LEVEL_IDS.map((id) => {
      const rules = policy.rules.filter((rule) => rule.level === id);
      return {
        id,
        name: policy.levels.find((level) => level.id === id)?.name ?? id,
        criteria: [...new Set(rules.flatMap((rule) => rule.criteria))].filter((c) => !local.has(c)),
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
      const criteria = [...(entry?.criteria ?? []), ...form.localCriteria.filter((c) => c.level === level).map((c) => c.id)];
      if (!entry || criteria.length === 0) return [];
      return [{ level, criteria, ...(entry.note ? { note: entry.note } : {}) }];
    }),
    localCriteria: form.localCriteria.map(({ id, label, reason, condition }) => ({ id, label, reason, condition })),
  };
}

const SET_NAMES: Record<CatalogEntry['set'], string> = { 'field-2021': '2021 guideline', 'field-2011': '2011 guideline', policy: 'Policy condition', local: 'Local criterion' };
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

export interface LocalFieldChange {
  field: 'Label' | 'Rule' | 'Level' | 'Reason' | 'Source';
  before: string | null;
  after: string | null;
}

export interface LocalDiff {
  label: string;
  kind: 'added' | 'removed' | 'changed' | 'same';
  fields: LocalFieldChange[];
}

function localFields(policy: Policy, c: LocalCriterion): Record<LocalFieldChange['field'], string> {
  const level = levelCalled(policy, c.id);
  return {
    Label: c.label,
    Rule: readBack(c.condition),
    Level: policy.levels.find((l) => l.id === level)?.name ?? level,
    Reason: c.reason,
    Source: c.source,
  };
}

/**
 * The two versions' own criteria, field by field. Ids name their version, so a criterion is
 * followed from one version to the next by its label, else by its rule.
 */
export function diffLocalCriteria(a: Policy, b: Policy): LocalDiff[] {
  const before = [...(a.localCriteria ?? [])];
  const out: LocalDiff[] = [];
  for (const c of b.localCriteria ?? []) {
    let k = before.findIndex((x) => x.label === c.label);
    if (k < 0) k = before.findIndex((x) => readBack(x.condition) === readBack(c.condition));
    const after = localFields(b, c);
    if (k < 0) {
      out.push({ label: c.label, kind: 'added', fields: Object.entries(after).map(([field, value]) => ({ field: field as LocalFieldChange['field'], before: null, after: value })) });
      continue;
    }
    const [old] = before.splice(k, 1);
    const was = localFields(a, old);
    // The source names the version, so it differs between any two versions; it is shown, not counted as a change.
    const fields = (Object.keys(after) as LocalFieldChange['field'][]).map((field) => ({ field, before: was[field], after: after[field] }));
    const changed = fields.some((f) => f.field !== 'Source' && f.before !== f.after);
    out.push({ label: c.label, kind: changed ? 'changed' : 'same', fields });
  }
  for (const old of before) {
    out.push({ label: old.label, kind: 'removed', fields: Object.entries(localFields(a, old)).map(([field, value]) => ({ field: field as LocalFieldChange['field'], before: value, after: null })) });
  }
  return out;
}
