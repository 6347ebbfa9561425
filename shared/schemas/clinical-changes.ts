import { z } from 'zod';
import { ClinicalInput } from './clinical';

/**
 * An update's clinical part: only what the crew changed, as a partial report. The server lays it
 * over the stored report and parses the result with the strict ClinicalInput, so a value the crew
 * did not touch is the stored value byte for byte (a height never comes back through a display
 * unit). A part set to null is cleared (unknown); a nested part changes only the keys it names;
 * a list replaces the stored list.
 */
type Json = unknown;
type JsonObject = Record<string, Json>;

const isPlainObject = (v: Json): v is JsonObject => typeof v === 'object' && v !== null && !Array.isArray(v);
const same = (a: Json, b: Json) => JSON.stringify(a ?? null) === JSON.stringify(b ?? null);
// Keys that would reach an object's prototype if copied onto it; none is a clinical field.
const FORBIDDEN_KEYS = new Set(['__proto__', 'constructor', 'prototype']);
const MAX_CHANGES_CHARS = 16_000;

function forbiddenKeyIn(value: Json, path: string[]): string | null {
  if (Array.isArray(value)) return null;
  if (!isPlainObject(value)) return null;
  for (const key of Object.keys(value)) {
    if (FORBIDDEN_KEYS.has(key)) return [...path, key].join('.');
    const deeper = forbiddenKeyIn(value[key], [...path, key]);
    if (deeper) return deeper;
  }
  return null;
}

/** The shape only; what it says is checked once merged, by ClinicalInput. */
export const ClinicalChanges = z
  .record(z.string(), z.unknown(), { error: 'must be an object of the changed clinical fields' })
  .superRefine((value, ctx) => {
    const key = forbiddenKeyIn(value, []);
    if (key) ctx.addIssue({ code: 'custom', message: `unknown field ${key}` });
    else if (JSON.stringify(value).length > MAX_CHANGES_CHARS) ctx.addIssue({ code: 'custom', message: `must be at most ${MAX_CHANGES_CHARS} characters as JSON` });
  });
export type ClinicalChanges = z.infer<typeof ClinicalChanges>;

function merge(stored: Json, changes: JsonObject): JsonObject {
  const out: JsonObject = isPlainObject(stored) ? { ...stored } : {};
  for (const [key, value] of Object.entries(changes)) {
    if (value === null) delete out[key];
    else if (isPlainObject(value) && isPlainObject(out[key])) out[key] = merge(out[key], value);
    else out[key] = value;
  }
  return out;
}

/**
 * The stored report with the changes laid over it, not yet parsed. A new height brings its typed
 * figure with it: a stored figure never stays beside metres it no longer matches.
 */
export function applyClinicalChanges(stored: ClinicalInput, changes: ClinicalChanges): Json {
  const merged = merge(stored, changes);
  const fall = changes.fall;
  if (isPlainObject(fall) && 'heightM' in fall && !('entered' in fall) && isPlainObject(merged.fall)) delete merged.fall.entered;
  return merged;
}

/** Parses the merged report; a bad value is named under `changes`, as the crew sent it. */
export const MergedClinical = z.object({ changes: ClinicalInput });

/**
 * What differs between the form as it opened (`before`) and as it is sent (`after`), both full
 * reports built the same way: an empty object when nothing changed. A changed height carries
 * both its metres and the figure typed.
 */
export function clinicalChanges(before: Json, after: Json): JsonObject {
  const b = isPlainObject(before) ? before : {};
  const a = isPlainObject(after) ? after : {};
  const out: JsonObject = {};
  for (const key of new Set([...Object.keys(b), ...Object.keys(a)])) {
    if (same(b[key], a[key])) continue;
    if (isPlainObject(a[key]) && isPlainObject(b[key])) {
      const inner = clinicalChanges(b[key], a[key]);
      if (key === 'fall' && ('heightM' in inner || 'entered' in inner)) {
        const fall = a[key] as JsonObject;
        inner.heightM = fall.heightM;
        inner.entered = fall.entered ?? null;
      }
      out[key] = inner;
    } else {
      out[key] = a[key] ?? null;
    }
  }
  return out;
}
