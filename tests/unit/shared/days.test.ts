import { describe, expect, it } from 'vitest';
import { addMonths, dayEnd, dayOf, dayStart, isTimeZoneName, lastDayOf, monthOf, periodOf } from '../../../shared/days';

// Day boundaries in a named zone. The expected instants are derived by hand from the zones' rules
// (common practice, no source; the rules from memory): the UK moves its clocks at 01:00 UTC on the
// last Sunday of March (forward) and of October (back); New Zealand runs UTC+12, UTC+13 in summer;
// Chile moves forward at local midnight on a Sunday in early September, so that 00:00 never comes;
// Cuba moved back at 01:00 local to 00:00, so that 00:00 came twice.

const HOUR = 3_600_000;
const utc = (iso: string) => Date.parse(iso);

describe('where a day begins and ends', () => {
  it('in UTC, at midnight UTC, 24 hours long', () => {
    expect(dayStart('2026-06-15', 'UTC')).toBe(utc('2026-06-15T00:00:00Z'));
    expect(dayEnd('2026-06-15', 'UTC') - dayStart('2026-06-15', 'UTC')).toBe(24 * HOUR);
  });

  it('in London on the day the clocks go forward (Sunday 29 March 2026): 23 hours', () => {
    expect(dayStart('2026-03-29', 'Europe/London')).toBe(utc('2026-03-29T00:00:00Z'));
    expect(dayEnd('2026-03-29', 'Europe/London')).toBe(utc('2026-03-29T23:00:00Z'));
    expect(dayEnd('2026-03-29', 'Europe/London') - dayStart('2026-03-29', 'Europe/London')).toBe(23 * HOUR);
  });

  it('in London on the day the clocks go back (Sunday 25 October 2026): 25 hours', () => {
    expect(dayStart('2026-10-25', 'Europe/London')).toBe(utc('2026-10-24T23:00:00Z'));
    expect(dayEnd('2026-10-25', 'Europe/London')).toBe(utc('2026-10-26T00:00:00Z'));
    expect(dayEnd('2026-10-25', 'Europe/London') - dayStart('2026-10-25', 'Europe/London')).toBe(25 * HOUR);
  });

  it('in New Zealand summer (UTC+13), the day begins 11:00 UTC the day before', () => {
    expect(dayStart('2026-01-15', 'Pacific/Auckland')).toBe(utc('2026-01-14T11:00:00Z'));
    expect(dayOf(utc('2026-01-14T11:00:00Z'), 'Pacific/Auckland')).toBe('2026-01-15');
    expect(dayOf(utc('2026-01-14T10:59:59Z'), 'Pacific/Auckland')).toBe('2026-01-14');
  });

  it('in New Zealand on a change day, midnight keeps the offset of the night before', () => {
    // 5 April 2026: back from UTC+13 to UTC+12 at 03:00 local; midnight is still UTC+13.
    expect(dayStart('2026-04-05', 'Pacific/Auckland')).toBe(utc('2026-04-04T11:00:00Z'));
    expect(dayEnd('2026-04-05', 'Pacific/Auckland') - dayStart('2026-04-05', 'Pacific/Auckland')).toBe(25 * HOUR);
    // 27 September 2026: forward from UTC+12 to UTC+13 at 02:00 local; midnight is still UTC+12.
    expect(dayStart('2026-09-27', 'Pacific/Auckland')).toBe(utc('2026-09-26T12:00:00Z'));
    expect(dayEnd('2026-09-27', 'Pacific/Auckland') - dayStart('2026-09-27', 'Pacific/Auckland')).toBe(23 * HOUR);
  });

  it('in Santiago, where midnight is skipped (6 September 2026), at the change: 01:00 local, 04:00 UTC', () => {
    expect(dayStart('2026-09-06', 'America/Santiago')).toBe(utc('2026-09-06T04:00:00Z'));
    expect(dayOf(utc('2026-09-06T03:59:59Z'), 'America/Santiago')).toBe('2026-09-05');
  });

  it('in Havana, where midnight came twice (29 October 2000), at the first of them', () => {
    // 01:00 UTC-4 went back to 00:00 UTC-5: the first 00:00 was 04:00 UTC.
    expect(dayStart('2000-10-29', 'America/Havana')).toBe(utc('2000-10-29T04:00:00Z'));
  });
});

describe('months and periods', () => {
  it('puts an instant in the month of the zone, not of UTC', () => {
    expect(monthOf(utc('2026-01-31T12:00:00Z'), 'Pacific/Auckland')).toBe('2026-02');
    expect(monthOf(utc('2026-01-31T12:00:00Z'), 'UTC')).toBe('2026-01');
  });

  it('counts months and finds their last days, leap years included', () => {
    expect(addMonths('2026-11', 3)).toBe('2027-02');
    expect(addMonths('2026-01', -11)).toBe('2025-02');
    expect(lastDayOf('2028-02')).toBe('2028-02-29');
    expect(lastDayOf('2026-02')).toBe('2026-02-28');
  });

  it('spans a period from the start of its first day to the end of its last, with each month’s start', () => {
    const period = periodOf('2026-02-15', '2026-04-30', 'Europe/London');
    expect(period.start).toBe(utc('2026-02-15T00:00:00Z'));
    expect(period.end).toBe(utc('2026-04-30T23:00:00Z'));
    expect(period.months).toEqual([
      { key: '2026-02', start: utc('2026-02-15T00:00:00Z') },
      { key: '2026-03', start: utc('2026-03-01T00:00:00Z') },
      { key: '2026-04', start: utc('2026-03-31T23:00:00Z') },
    ]);
  });

  it('knows a time zone name from a typing slip', () => {
    expect(isTimeZoneName('Europe/London')).toBe(true);
    expect(isTimeZoneName('UTC')).toBe(true);
    expect(isTimeZoneName('Europe/Londn')).toBe(false);
  });
});
