import type { z } from 'zod';

export interface FieldIssue {
  /** Dotted path into the input, array positions in brackets: `vitals.sbp`, `findings[2]`. */
  field: string;
  message: string;
}

export function fieldPath(path: readonly PropertyKey[]): string {
  let out = '';
  for (const key of path) {
    if (typeof key === 'number') out += `[${key}]`;
    else out += out === '' ? String(key) : `.${String(key)}`;
  }
  return out === '' ? '(input)' : out;
}

/** Flat, field-named messages for a server answer or a form ("vitals.sbp: must be at most 300"). */
export function describeIssues(error: z.ZodError | { issues: readonly z.core.$ZodIssue[] }): FieldIssue[] {
  return error.issues.map((issue) => ({ field: fieldPath(issue.path), message: issue.message }));
}

export function formatIssue(issue: FieldIssue): string {
  return `${issue.field}: ${issue.message}`;
}
