import { z } from 'zod';
import { ClinicalInput } from './clinical';
import type { ClinicalChanges } from './cases';

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

function merge(stored: Json, changes: JsonObject): JsonObject {
  const out: JsonObject = isPlainObject(stored) ? { ...stored } : {};
  for (const [key, value] of Object.entries(changes)) {
    if (value === null) delete out[key];
    // Defined, not assigned: a key such as __proto__ stays an own (unknown) field that the strict
    // parse then names, and never reaches the object's prototype.
    else Object.defineProperty(out, key, { value: isPlainObject(value) && Object.hasOwn(out, key) && isPlainObject(out[key]) ? merge(out[key], value) : value, enumerable: true, writable: true, configurable: true });
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
