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
  return error.issues.flatMap((issue) => {
    // An unknown key is named by its own path, one issue per key.
    if (issue.code === 'unrecognized_keys') {
      const messages = issue.message.split('; unknown field ');
      return issue.keys.map((key, i) => ({
        field: fieldPath([...issue.path, key]),
        message: issue.keys.length === messages.length ? (i === 0 ? messages[0] : `unknown field ${messages[i]}`) : issue.message,
      }));
    }
    return [{ field: fieldPath(issue.path), message: issue.message }];
  });
}

/** "vitals.sbp: must be at most 300"; an unknown field's message names it already. */
export function formatIssue(issue: FieldIssue): string {
  return issue.message.startsWith('unknown field ') ? issue.message : `${issue.field}: ${issue.message}`;
}
