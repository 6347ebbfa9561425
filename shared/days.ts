import dayjs from 'dayjs';
import utc from 'dayjs/plugin/utc';
import timezone from 'dayjs/plugin/timezone';
import { z } from 'zod';

dayjs.extend(utc);
dayjs.extend(timezone);

// Where a reader's day and month begin, in a named time zone: one home for day boundaries. A day
// is not always 24 hours (23 or 25 on a daylight-saving change), so a day's end is the next day's
// start, never start + 24 h.

/** Whether the runtime knows this time zone name (an IANA name such as Europe/London, or UTC). */
export function isTimeZoneName(name: string): boolean {
  try {
    new Intl.DateTimeFormat('en-GB', { timeZone: name });
    return true;
  } catch {
    return false;
  }
}

/** The reader's time zone, as a query field: it decides where a day and a month begin. */
export const ReaderTimeZone = z.string({ error: 'must be a time zone name' }).max(64).refine(isTimeZoneName, { error: 'must be a time zone name such as Europe/London' }).default('UTC');

/** The time zone this runtime runs in (the browser's for a reader), UTC when it names none. */
export const runtimeTimeZone = (): string => Intl.DateTimeFormat().resolvedOptions().timeZone || 'UTC';

const HOUR = 3_600_000;
const offsetAt = (ms: number, timeZone: string): number => dayjs(ms).tz(timeZone).utcOffset() * 60_000;

/**
 * The instant a calendar day (YYYY-MM-DD) begins in the zone. Where the clocks go back at
 * midnight, 00:00 comes twice and the day begins at the first; where they go forward at midnight,
 * 00:00 never comes and the day begins at the change (dayjs finds that one by itself).
 */
export function dayStart(day: string, timeZone: string): number {
  const wall = dayjs.utc(day).valueOf();
  // Every offset in use within a day either side: no zone changes its clocks twice in that time.
  const readings = [offsetAt(wall - 14 * HOUR, timeZone), offsetAt(wall + 12 * HOUR, timeZone)]
    .map((offset) => wall - offset)
    .filter((instant) => instant + offsetAt(instant, timeZone) === wall);
  return readings.length ? Math.min(...readings) : dayjs.tz(day, timeZone).valueOf();
}

/** The instant the day after this one begins in the zone: the end of this day, exclusive. */
export const dayEnd = (day: string, timeZone: string): number => dayStart(dayjs.utc(day).add(1, 'day').format('YYYY-MM-DD'), timeZone);

/** The calendar day (YYYY-MM-DD) an instant falls on in the zone. */
export const dayOf = (ms: number, timeZone: string): string => dayjs(ms).tz(timeZone).format('YYYY-MM-DD');

/** The calendar month (YYYY-MM) an instant falls on in the zone. */
export const monthOf = (ms: number, timeZone: string): string => dayjs(ms).tz(timeZone).format('YYYY-MM');

/** The month `by` months after YYYY-MM (before, when negative). */
export const addMonths = (month: string, by: number): string => dayjs.utc(`${month}-01`).add(by, 'month').format('YYYY-MM');

/** The last calendar day (YYYY-MM-DD) of a month given as YYYY-MM. */
export const lastDayOf = (month: string): string => dayjs.utc(`${month}-01`).endOf('month').format('YYYY-MM-DD');

export interface Period { start: number; end: number; months: Array<{ key: string; start: number }> }

/** From the start of `from` to the end of `to` in the zone, and where each calendar month in it begins. */
export function periodOf(from: string, to: string, timeZone: string): Period {
  const start = dayStart(from, timeZone);
  const end = dayEnd(to, timeZone);
  const months: Period['months'] = [];
  for (let key = from.slice(0, 7); key <= to.slice(0, 7); key = addMonths(key, 1)) {
    months.push({ key, start: months.length === 0 ? start : dayStart(`${key}-01`, timeZone) });
  }
  return { start, end, months };
}
