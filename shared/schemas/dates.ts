import { z } from 'zod';

// The dates a person may ask about: reports and reviews cover real years of a trauma programme,
// so a date before 2000 or after 2100 is a typing slip, and a range longer than ten years would
// only read the whole database [ours: the bounds].

export const EARLIEST_DATE = '2000-01-01';
export const LATEST_DATE = '2100-12-31';
export const MAX_RANGE_YEARS = 10;

/** The first and last millisecond a stored time (an effective date, say) may take. */
export const EARLIEST_TIME = Date.UTC(2000, 0, 1);
export const LATEST_TIME = Date.UTC(2101, 0, 1) - 1;

/** A calendar day, YYYY-MM-DD, within 2000–2100. */
export const boundedDate = z.iso
  .date({ error: 'must be a date (YYYY-MM-DD)' })
  .refine((day) => day >= EARLIEST_DATE && day <= LATEST_DATE, { error: `must be between ${EARLIEST_DATE} and ${LATEST_DATE}` });

/** A time in milliseconds since 1970, within 2000–2100. */
export const boundedTime = z
  .number({ error: 'must be a time' })
  .int({ error: 'must be a whole number of milliseconds' })
  .min(EARLIEST_TIME, { error: `must be on or after ${EARLIEST_DATE}` })
  .max(LATEST_TIME, { error: `must be on or before ${LATEST_DATE}` });

/** The end of a range at most ten years after its start; an open end passes. */
export function withinMaxSpan(q: { from?: string; to?: string }): boolean {
  if (!q.from || !q.to) return true;
  const limit = `${String(Number(q.from.slice(0, 4)) + MAX_RANGE_YEARS).padStart(4, '0')}${q.from.slice(4)}`;
  return q.to <= limit;
}
export const spanIssue = { error: `must be at most ${MAX_RANGE_YEARS} years after the start date`, path: ['to'] };
