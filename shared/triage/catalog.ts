import type { Criterion, CriterionCategory, CriterionSetId, NemsisCode, RiskTier, CriteriaSet, CriteriaSetId } from './criteria';
import { FIELD_2011 } from './field-2011';
import { FIELD_2021 } from './field-2021';
import { POLICY_CRITERIA } from './policy-criteria';
import { compileCriterion, type CompiledCriterion } from './compile-criteria';

export const CRITERIA_SETS: Readonly<Record<CriteriaSetId, CriteriaSet>> = {
  'field-2021': FIELD_2021,
  'field-2011': FIELD_2011,
};
export const DEFAULT_SET: CriteriaSetId = 'field-2021';

const ALL: readonly Criterion[] = [...FIELD_2021.criteria, ...FIELD_2011.criteria, ...POLICY_CRITERIA];

export interface CatalogEntry {
  id: string;
  set: CriterionSetId;
  category: CriterionCategory;
  tier: RiskTier | null;
  label: string;
  source: string;
  sourceLabel?: string;
  nemsis: NemsisCode | null;
  note?: string;
}

/** Every criterion a policy rule may name, for the Policies screen: both guideline sets and the policy conditions. */
export const CRITERION_CATALOG: readonly CatalogEntry[] = ALL.map(({ when: _when, ...entry }) => Object.freeze(entry));

const COMPILED: readonly CompiledCriterion[] = ALL.map(compileCriterion);
const INDEX = new Map<string, number>(ALL.map((c, i) => [c.id, i]));
if (INDEX.size !== ALL.length) throw new Error('criterion ids must be unique');

// A hospital's own criteria (local-criteria.ts) join the catalog when a policy carrying them is
// checked or put to use. Their ids name the policy, its version and a hash of their content, so
// an id always means the same criterion and registering it again changes nothing.
const LOCAL = new Map<string, { entry: CatalogEntry; compiled: CompiledCriterion }>();

export function registerCriterion(compiled: CompiledCriterion): void {
  const { when: _when, ...entry } = compiled.criterion;
  if (INDEX.has(entry.id)) throw new Error(`criterion id ${entry.id} belongs to a shipped set`);
  if (!LOCAL.has(entry.id)) LOCAL.set(entry.id, { entry: Object.freeze(entry), compiled });
}

export function findCriterion(id: string): CatalogEntry | undefined {
  const i = INDEX.get(id);
  return i === undefined ? LOCAL.get(id)?.entry : CRITERION_CATALOG[i];
}

export function compiledCriterion(id: string): CompiledCriterion | undefined {
  const i = INDEX.get(id);
  return i === undefined ? LOCAL.get(id)?.compiled : COMPILED[i];
}

export function isCriteriaSetId(id: string): id is CriteriaSetId {
  return Object.prototype.hasOwnProperty.call(CRITERIA_SETS, id);
}

/**
 * A fired or catalogued criterion's source in plain words for screens ("2021 field-triage
 * guideline (Newgard 2022)"); a result stored before results carried it takes the catalogue's,
 * and a criterion with no plain label shows its source as written.
 */
export function plainSource(c: { id: string; source: string; sourceLabel?: string }): string {
  return c.sourceLabel ?? findCriterion(c.id)?.sourceLabel ?? c.source;
}
