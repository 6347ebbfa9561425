// One way to write a date on every screen: "4 Dec 2026", "4 Dec 2026, 03:12", "Dec 2026".
// The department's screens run in its own browser, so its locale is the one the staff read; the
// product writes dates in the British day-month-year order with a short month name, which no
// reader takes for another day, whatever their locale's numeric order [ours].
const LOCALE = 'en-GB';

const DAY = new Intl.DateTimeFormat(LOCALE, { day: 'numeric', month: 'short', year: 'numeric' });
const DAY_TIME = new Intl.DateTimeFormat(LOCALE, { day: 'numeric', month: 'short', year: 'numeric', hour: '2-digit', minute: '2-digit', hourCycle: 'h23' });
const DAY_TIME_SECONDS = new Intl.DateTimeFormat(LOCALE, { day: 'numeric', month: 'short', year: 'numeric', hour: '2-digit', minute: '2-digit', second: '2-digit', hourCycle: 'h23' });
const MONTH = new Intl.DateTimeFormat(LOCALE, { month: 'short', year: 'numeric' });

export const formatDay = (ms: number): string => DAY.format(ms);
export const formatDayTime = (ms: number): string => DAY_TIME.format(ms);
export const formatDayTimeSeconds = (ms: number): string => DAY_TIME_SECONDS.format(ms);
/** A month given as YYYY-MM: "Dec 2026". */
export const formatMonth = (key: string): string => {
  const [y, m] = key.split('-').map(Number);
  return MONTH.format(new Date(y, m - 1, 1));
};
