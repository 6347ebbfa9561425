// The reader's days and months: a report's period in the hospital's time zone.

const offsetFormatters = new Map<string, Intl.DateTimeFormat>();

/** Local time minus UTC at this instant, in ms. */
function zoneOffset(ms: number, timeZone: string): number {
  let f = offsetFormatters.get(timeZone);
  if (!f) {
    f = new Intl.DateTimeFormat('en-US', { timeZone, hourCycle: 'h23', year: 'numeric', month: 'numeric', day: 'numeric', hour: 'numeric', minute: 'numeric', second: 'numeric' });
    offsetFormatters.set(timeZone, f);
  }
  const p: Record<string, number> = {};
  for (const part of f.formatToParts(ms)) if (part.type !== 'literal') p[part.type] = Number(part.value);
  return Date.UTC(p.year, p.month - 1, p.day, p.hour, p.minute, p.second) - Math.floor(ms / 1000) * 1000;
}

/** The instant local midnight begins on this calendar day in the zone. */
export function localMidnight(year: number, month: number, day: number, timeZone: string): number {
  const guess = Date.UTC(year, month - 1, day);
  const first = guess - zoneOffset(guess, timeZone);
  const second = guess - zoneOffset(first, timeZone);
  return second;
}

const ymd = (date: string) => date.split('-').map(Number) as [number, number, number];

export interface Period { start: number; end: number; months: Array<{ key: string; start: number }> }

/** From the start of `from` to the end of `to`, and where each calendar month in it begins. */
export function periodOf(from: string, to: string, timeZone: string): Period {
  const [fy, fm, fd] = ymd(from);
  const [ty, tm, td] = ymd(to);
  const start = localMidnight(fy, fm, fd, timeZone);
  const next = new Date(Date.UTC(ty, tm - 1, td + 1));
  const end = localMidnight(next.getUTCFullYear(), next.getUTCMonth() + 1, next.getUTCDate(), timeZone);
  const months: Period['months'] = [];
  for (let y = fy, m = fm; y < ty || (y === ty && m <= tm); m === 12 ? (y++, (m = 1)) : m++) {
    const key = `${y}-${String(m).padStart(2, '0')}`;
    months.push({ key, start: months.length === 0 ? start : localMidnight(y, m, 1, timeZone) });
  }
  return { start, end, months };
}
