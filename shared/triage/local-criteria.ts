import { z } from 'zod';
import { considerationOptions, findingOptions } from '../schemas/clinical-options';
import type { FieldIssue } from '../schemas/issues';
import { registerCriterion } from './catalog';
import { compileCriterion } from './compile-criteria';
import type { Condition, Criterion, CriterionCategory, Flag, Quantity } from './criteria';

// A hospital's own criterion, written in a form from parts rather than in a formula language. The
// parts become an ordinary `when` tree, the data the shipped criteria are written in, so the
// engine evaluates a local criterion like any other, with the same three-valued logic.

export * from '../schemas/local-criteria';
import { COMPARISONS, MEASURES, MeasurePart, LocalCondition, type Comparison, type HeightUnit, type LocalCriterion, type LocalCriterionDraft, type LocalLeaf, type LocalMeasure, type LocalPart, type LOCAL_FLAGS } from '../schemas/local-criteria';

/** One foot is 0.3048 m (international foot); one storey is 10 ft [source: 2011 guideline, Sasser 2012]. */
const METRES_PER: Record<HeightUnit, number> = { m: 1, ft: 0.3048, storeys: 3.048 };


const FLAG_WORDS: Record<(typeof LOCAL_FLAGS)[number], string> = {
  anticoagulant: 'on an anticoagulant',
  headImpact: 'head struck',
  intubated: 'intubated',
  respiratorySupport: 'on respiratory support',
  respiratoryDistress: 'in respiratory distress',
};
const FINDING_WORDS = Object.fromEntries(findingOptions.map((o) => [o.id, o.label.toLowerCase()]));
const CONSIDERATION_WORDS = Object.fromEntries(considerationOptions.map((o) => [o.id, o.label.toLowerCase()]));


// ---- Parts → `when`

const round = (v: number, places: number) => Math.round(v * 10 ** places) / 10 ** places;
/** Metres to 6 places: a foot or a storey converted reads back as the number typed. */
const toMetres = (v: number, unit: HeightUnit) => round(v * METRES_PER[unit], 6);
const fromMetres = (m: number, unit: HeightUnit) => round(m / METRES_PER[unit], 6);
const numText = (v: number, places = 1) => String(round(v, places));

/** "4.6 m (15 ft)": metres first, as the engine's explanations give them, then feet. */
export function heightWords(metres: number, unit: HeightUnit): string {
  const ft = `${numText(metres / 0.3048)} ft`;
  return `${numText(metres)} m (${unit === 'storeys' ? `${ft}, ${numText(metres / 3.048)} storeys` : ft})`;
}

/** The largest number below v: "above it" is "at least v" for every recorded number. */
function justBelow(v: number): number {
  if (v === 0) return -Number.MIN_VALUE;
  const buffer = new DataView(new ArrayBuffer(8));
  buffer.setFloat64(0, v);
  const bits = buffer.getBigUint64(0);
  buffer.setBigUint64(0, v > 0 ? bits - 1n : bits + 1n);
  return buffer.getFloat64(0);
}

/** Marks a threshold written as "at least" in an explanation (see explainLocal below). */
const AT_LEAST = '≥ ';

function measureWhen(p: z.infer<typeof MeasurePart>, unit: HeightUnit): Condition {
  if (p.measure === 'age') {
    // Completed years, as the guideline's age bands [ours: reading of the bands].
    const v = p.value;
    switch (p.comparison) {
      case 'below': return { kind: 'age', below: v, label: `under ${v}` };
      case 'at-most': return { kind: 'age', below: v + 1, label: `${v} or younger` };
      case 'at-least': return { kind: 'age', from: v, label: `${v} or older` };
      case 'above': return { kind: 'age', from: v + 1, label: `over ${v}` };
    }
  }
  if (p.measure === 'spo2RoomAir') return { kind: 'room-air-spo2-below', value: p.value };
  const info = MEASURES[p.measure];
  const quantity = info.quantity!;
  const value = p.measure === 'fallHeight' ? toMetres(p.value, unit) : p.value;
  const shown = p.measure === 'fallHeight' ? `${value} m (${numText(value / 0.3048)} ft)` : undefined;
  switch (p.comparison) {
    case 'below': return { kind: 'below', quantity, value, ...(shown ? { display: shown } : {}) };
    case 'at-most': return { kind: 'at-most', quantity, value, ...(shown ? { display: shown } : {}) };
    case 'above': return { kind: 'above', quantity, value, ...(shown ? { display: shown } : {}) };
    // The engine has no "at least": above the number just below it is the same test.
    case 'at-least': return { kind: 'above', quantity, value: justBelow(value), display: AT_LEAST + (shown ?? String(value)) };
  }
}

function leafWhen(p: LocalLeaf, unit: HeightUnit): Condition {
  switch (p.kind) {
    case 'measure': return measureWhen(p, unit);
    case 'age-band': return { kind: 'age', from: p.from, below: p.to + 1, label: `${p.from}–${p.to}` };
    case 'flag': return { kind: 'flag', flag: p.flag as Flag };
    case 'finding': return { kind: 'finding', finding: p.finding };
    case 'consideration': return { kind: 'consideration', consideration: p.consideration };
  }
}

function partWhen(p: LocalPart, unit: HeightUnit): Condition {
  if (p.kind !== 'group') return leafWhen(p, unit);
  return p.parts.length === 1 ? leafWhen(p.parts[0], unit) : { kind: p.join, of: p.parts.map((q) => leafWhen(q, unit)) };
}

/** The engine's condition for the parts (a single part stands alone). */
export function conditionToWhen(c: LocalCondition): Condition {
  return c.parts.length === 1 ? partWhen(c.parts[0], c.heightUnit) : { kind: c.join, of: c.parts.map((p) => partWhen(p, c.heightUnit)) };
}

// ---- `when` → parts (the read-back in the other direction, for a stored criterion)

const QUANTITY_MEASURE: Partial<Record<Quantity, LocalMeasure>> = { heightM: 'fallHeight', sbp: 'sbp', hr: 'hr', rr: 'rr', gcsTotal: 'gcsTotal', gcsMotor: 'gcsMotor' };

function whenToLeaf(w: Condition, unit: HeightUnit): LocalLeaf {
  const measure = (q: Quantity, comparison: Comparison, v: number): LocalLeaf => {
    const m = QUANTITY_MEASURE[q];
    if (!m) throw new Error(`no form measure for ${q}`);
    return { kind: 'measure', measure: m, comparison, value: m === 'fallHeight' ? fromMetres(v, unit) : v };
  };
  switch (w.kind) {
    case 'below': return measure(w.quantity, 'below', w.value);
    case 'at-most': return measure(w.quantity, 'at-most', w.value);
    case 'above': {
      const atLeast = w.display?.startsWith(AT_LEAST) ?? false;
      // The threshold typed is the number just above the stored one; 9 places recover it.
      return measure(w.quantity, atLeast ? 'at-least' : 'above', atLeast ? round(w.value, 9) : w.value);
    }
    case 'room-air-spo2-below': return { kind: 'measure', measure: 'spo2RoomAir', comparison: 'below', value: w.value };
    case 'age': {
      if (w.from !== undefined && w.below !== undefined) return { kind: 'age-band', from: w.from, to: w.below - 1 };
      if (w.below !== undefined) return { kind: 'measure', measure: 'age', comparison: w.label.startsWith('under') ? 'below' : 'at-most', value: w.label.startsWith('under') ? w.below : w.below - 1 };
      const from = w.from ?? 0;
      return { kind: 'measure', measure: 'age', comparison: w.label.startsWith('over') ? 'above' : 'at-least', value: w.label.startsWith('over') ? from - 1 : from };
    }
    case 'flag': return { kind: 'flag', flag: w.flag as (typeof LOCAL_FLAGS)[number] };
    case 'finding': return { kind: 'finding', finding: w.finding };
    case 'consideration': return { kind: 'consideration', consideration: w.consideration };
    default: throw new Error(`no form part for ${w.kind}`);
  }
}

/** The form's parts for a condition tree the form wrote: the inverse of conditionToWhen. */
export function whenToCondition(w: Condition, heightUnit: HeightUnit): LocalCondition {
  if (w.kind !== 'all' && w.kind !== 'any') return { join: 'all', parts: [whenToLeaf(w, heightUnit)], heightUnit };
  return {
    join: w.kind,
    heightUnit,
    parts: w.of.map((p): LocalPart => (p.kind === 'all' || p.kind === 'any'
      ? { kind: 'group', join: p.kind, parts: p.of.map((q) => whenToLeaf(q, heightUnit)) }
      : whenToLeaf(p, heightUnit))),
  };
}

// ---- The read-back sentence

const COMPARISON_WORDS: Record<Comparison, string> = { below: 'below', 'at-most': 'at most', 'at-least': 'at least', above: 'above' };

function leafWords(p: LocalLeaf, unit: HeightUnit): string {
  switch (p.kind) {
    case 'measure': {
      const v = p.value;
      if (p.measure === 'age') {
        return { below: `age under ${v}`, 'at-most': `age ${v} or younger`, 'at-least': `age ${v} or older`, above: `age over ${v}` }[p.comparison];
      }
      const info = MEASURES[p.measure];
      const value = p.measure === 'fallHeight' ? heightWords(toMetres(v, unit), unit) : `${numText(v)}${info.unit ? (info.unit === '%' ? ' %' : ` ${info.unit}`) : ''}`;
      return `${info.name} ${COMPARISON_WORDS[p.comparison]} ${value}`;
    }
    case 'age-band': return `age ${p.from}–${p.to}`;
    case 'flag': return FLAG_WORDS[p.flag];
    case 'finding': return FINDING_WORDS[p.finding] ?? p.finding;
    case 'consideration': return CONSIDERATION_WORDS[p.consideration] ?? p.consideration;
  }
}

function joinWords(words: string[], join: 'all' | 'any'): string {
  if (words.length <= 1) return words[0] ?? '';
  return `${words.slice(0, -1).join(', ')} ${join === 'all' ? 'and' : 'or'} ${words[words.length - 1]}`;
}

/** The rule as a clinician would say it: "Age 55 or older and fall above 4.6 m (15 ft)". */
export function readBack(c: LocalCondition): string {
  const words = c.parts.map((p) => (p.kind === 'group'
    ? (p.parts.length > 1 ? `(${joinWords(p.parts.map((q) => leafWords(q, c.heightUnit)), p.join)})` : leafWords(p.parts[0], c.heightUnit))
    : leafWords(p, c.heightUnit)));
  const sentence = joinWords(words, c.join);
  return sentence.charAt(0).toUpperCase() + sentence.slice(1);
}

// ---- Checks: refuse what nothing can meet, naming the part

interface Interval { lo: number; loOpen: boolean; hi: number; hiOpen: boolean }

function intervalOf(p: z.infer<typeof MeasurePart>): Interval {
  const { min, max } = MEASURES[p.measure];
  const v = p.value;
  switch (p.comparison) {
    case 'below': return { lo: min, loOpen: false, hi: v, hiOpen: true };
    case 'at-most': return { lo: min, loOpen: false, hi: v, hiOpen: false };
    case 'at-least': return { lo: v, loOpen: false, hi: max, hiOpen: false };
    case 'above': return { lo: v, loOpen: true, hi: max, hiOpen: false };
  }
}

const isEmpty = (i: Interval) => i.lo > i.hi || (i.lo === i.hi && (i.loOpen || i.hiOpen));
function intersect(a: Interval, b: Interval): Interval {
  const lo = a.lo > b.lo ? a : b.lo > a.lo ? b : { lo: a.lo, loOpen: a.loOpen || b.loOpen };
  const hi = a.hi < b.hi ? a : b.hi < a.hi ? b : { hi: a.hi, hiOpen: a.hiOpen || b.hiOpen };
  return { lo: lo.lo, loOpen: lo.loOpen, hi: hi.hi, hiOpen: hi.hiOpen };
}

function checkLeaf(p: LocalLeaf, field: string, unit: HeightUnit, issues: FieldIssue[]): void {
  if (p.kind === 'age-band') {
    if (p.from < 0 || p.to > 120) issues.push({ field, message: `age band ${p.from}–${p.to}: ages run from 0 to 120` });
    else if (p.from > p.to) issues.push({ field, message: `age band from ${p.from} to ${p.to}: the band starts after it ends` });
    return;
  }
  if (p.kind !== 'measure') return;
  const info = MEASURES[p.measure];
  const words = leafWords(p, unit);
  if (!info.comparisons.includes(p.comparison)) {
    issues.push({ field: `${field}.comparison`, message: `${info.name} can only be compared with: ${info.comparisons.map((c) => COMPARISON_WORDS[c]).join(', ')}` });
    return;
  }
  const inUnit = p.measure === 'fallHeight' ? { min: fromMetres(info.min, unit), max: fromMetres(info.max, unit), unit } : { min: info.min, max: info.max, unit: info.unit };
  if (p.value < inUnit.min || p.value > inUnit.max) {
    issues.push({ field: `${field}.value`, message: `${words}: ${info.name} must lie between ${inUnit.min} and ${inUnit.max}${inUnit.unit ? ` ${inUnit.unit}` : ''}` });
    return;
  }
  if (p.measure === 'age' && !Number.isInteger(p.value)) {
    issues.push({ field: `${field}.value`, message: `${words}: age is compared in whole years` });
    return;
  }
  if (isEmpty(intervalOf(p))) issues.push({ field, message: `${words}: no patient can meet this (${info.name} runs from ${inUnit.min} to ${inUnit.max}${inUnit.unit ? ` ${inUnit.unit}` : ''})` });
}

/** Parts joined by "all" that bound the same measure (an age band bounds age) and leave nothing between them. */
function checkAllOf(parts: readonly LocalLeaf[], field: string, unit: HeightUnit, issues: FieldIssue[]): void {
  const bounds = new Map<string, { interval: Interval; words: string[] }>();
  for (const p of parts) {
    let key: string, interval: Interval;
    if (p.kind === 'measure') {
      if (p.measure === 'spo2RoomAir') continue;
      key = p.measure;
      interval = intervalOf(p);
      // Age is in completed years: "above 60" starts at 61.
      if (p.measure === 'age') interval = { lo: interval.loOpen ? interval.lo + 1 : interval.lo, loOpen: false, hi: interval.hiOpen ? interval.hi - 1 : interval.hi, hiOpen: false };
    } else if (p.kind === 'age-band') {
      key = 'age';
      interval = { lo: p.from, loOpen: false, hi: p.to, hiOpen: false };
    } else continue;
    const known = bounds.get(key);
    const words = leafWords(p, unit);
    if (!known) bounds.set(key, { interval, words: [words] });
    else {
      known.interval = intersect(known.interval, interval);
      known.words.push(words);
    }
  }
  for (const { interval, words } of bounds.values()) {
    if (words.length > 1 && isEmpty(interval)) issues.push({ field, message: `a condition nothing can meet: ${joinWords(words, 'all')} cannot all hold at once` });
  }
}

/** The problems of a condition, each naming its part ("condition.parts[1].value"); empty when it can be met. */
export function checkCondition(c: LocalCondition, field = 'condition'): FieldIssue[] {
  const issues: FieldIssue[] = [];
  if (c.parts.length === 0) return [{ field: `${field}.parts`, message: 'the condition is empty: add at least one part' }];
  const before = () => issues.length;
  c.parts.forEach((p, i) => {
    const at = `${field}.parts[${i}]`;
    if (p.kind !== 'group') return checkLeaf(p, at, c.heightUnit, issues);
    if (p.parts.length === 0) return void issues.push({ field: `${at}.parts`, message: 'the group is empty: add at least one part or remove the group' });
    const n = before();
    p.parts.forEach((q, k) => checkLeaf(q, `${at}.parts[${k}]`, c.heightUnit, issues));
    if (before() === n && p.join === 'all') checkAllOf(p.parts, at, c.heightUnit, issues);
  });
  if (issues.length === 0 && c.join === 'all') {
    checkAllOf(c.parts.flatMap((p) => (p.kind === 'group' ? (p.join === 'all' || p.parts.length === 1 ? p.parts : []) : [p])), field, c.heightUnit, issues);
  }
  return issues;
}

// ---- A stored local criterion, as the engine's criterion

/** FNV-1a over the text, in base 36: a short fingerprint, not a secret. */
function fingerprint(textIn: string): string {
  let h = 0x811c9dc5;
  for (let i = 0; i < textIn.length; i++) {
    h ^= textIn.charCodeAt(i);
    h = Math.imul(h, 0x01000193) >>> 0;
  }
  return h.toString(36);
}

/** JSON with keys in sorted order, so a parsed copy of a criterion gives the same text. */
function canonical(value: unknown): string {
  if (Array.isArray(value)) return `[${value.map(canonical).join(',')}]`;
  if (value && typeof value === 'object') {
    return `{${Object.keys(value).filter((k) => (value as Record<string, unknown>)[k] !== undefined).sort()
      .map((k) => `${JSON.stringify(k)}:${canonical((value as Record<string, unknown>)[k])}`).join(',')}}`;
  }
  return JSON.stringify(value);
}

/** "Local policy of Alderwick General Hospital, version 3". */
export const localSourceOf = (hospitalName: string, version: number) => `Local policy of ${hospitalName}, version ${version}`;

/**
 * The criterion's id: its policy, version and a fingerprint of what it says, so that one id always
 * names one criterion (the engine keeps compiled criteria by id) and a tampered one shows.
 */
export function localCriterionId(policyId: string, version: number, c: Omit<LocalCriterion, 'id'>): string {
  return `local:${policyId}:v${version}:${fingerprint(canonical([c.label, c.reason, c.source, c.condition, c.when]))}`;
}

const CATEGORY: Record<LocalMeasure, CriterionCategory> = {
  fallHeight: 'mechanism', age: 'special', sbp: 'physiologic', hr: 'physiologic', rr: 'physiologic', spo2RoomAir: 'physiologic', gcsTotal: 'physiologic', gcsMotor: 'physiologic',
};

function categoryOf(c: LocalCondition): CriterionCategory {
  const leaves = c.parts.flatMap((p) => (p.kind === 'group' ? p.parts : [p]));
  const measured = leaves.find((p) => p.kind === 'measure' && p.measure !== 'age');
  if (measured?.kind === 'measure') return CATEGORY[measured.measure];
  if (leaves.some((p) => p.kind === 'finding')) return 'anatomic';
  return 'special';
}

/** The stored criterion in the engine's own form: an ordinary criterion with its own source. */
export function toCriterion(c: LocalCriterion): Criterion {
  return {
    id: c.id, set: 'local', category: categoryOf(c.condition), tier: null, nemsis: null,
    label: c.label, source: `${c.source}. Reason: ${c.reason}`, when: c.when,
  };
}

/** The stored form of a draft criterion: its `when`, its source and its id made from them. */
export function settleLocalCriterion(draft: LocalCriterionDraft, policyId: string, version: number, hospitalName: string): LocalCriterion {
  const body = { label: draft.label, reason: draft.reason, condition: draft.condition, source: localSourceOf(hospitalName, version), when: conditionToWhen(draft.condition) };
  return { id: localCriterionId(policyId, version, body), ...body };
}

/** Checks a stored criterion against its policy: the condition can be met, and `when` and id are the ones it makes. */
export function checkLocalCriterion(c: LocalCriterion, policyId: string, version: number, field: string): FieldIssue[] {
  const issues = checkCondition(c.condition, `${field}.condition`);
  if (issues.length) return issues;
  if (canonical(c.when) !== canonical(conditionToWhen(c.condition))) return [{ field: `${field}.when`, message: 'does not match the condition it was made from' }];
  const { id: _id, ...body } = c;
  if (c.id !== localCriterionId(policyId, version, body)) return [{ field: `${field}.id`, message: `does not belong to this criterion in version ${version} of ${policyId}` }];
  return [];
}

/**
 * The criterion made known to the engine. A met "at least" reads "SBP 90 ≥ 90" rather than the
 * engine's own "> ≥ 90" for the number just below.
 */
export function registerLocalCriterion(c: LocalCriterion): void {
  const compiled = compileCriterion(toCriterion(c));
  const explain = compiled.explain;
  registerCriterion(JSON.stringify(c.when).includes(AT_LEAST) ? { ...compiled, explain: (f) => explain(f).replaceAll(` > ${AT_LEAST}`, ' ≥ ') } : compiled);
}

/** Registers a policy's local criteria (once per policy object) so that evaluate() finds them; returns the policy. */
const registered = new WeakSet<object>();
export function withLocalCriteria<P extends { localCriteria?: readonly LocalCriterion[] }>(policy: P): P {
  if (policy.localCriteria?.length && !registered.has(policy)) {
    for (const c of policy.localCriteria) registerLocalCriterion(c);
    registered.add(policy);
  }
  return policy;
}
