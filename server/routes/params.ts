import { z } from 'zod';

/**
 * A record's number in a path: digits only. Plain coercion would read "0x10" as 16, " 1 " as 1
 * and "1e3" as 1000, so a mistyped or crafted address would quietly act on some other record.
 */
export const recordId = (what = 'a number') =>
  z.string({ error: `must be ${what}` }).regex(/^[1-9][0-9]{0,14}$/, { error: `must be ${what}: digits only, no sign, no leading zero` }).transform(Number);

export const IdParam = z.object({ id: recordId() });
export const CaseIdParam = z.object({ id: recordId('a case number') });
