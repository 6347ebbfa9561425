import type { Interval } from '@shared/quality';
import type { TargetStanding } from '@shared/schemas/quality';

// How the quality figures read on screen and on paper: one decimal, the interval beside it.

export const percent = (v: number | null | undefined) => (v == null ? '—' : `${(v * 100).toFixed(1)} %`);
export const interval = (ci: Interval | null | undefined) => (ci ? `95 % CI ${(ci[0] * 100).toFixed(1)}–${(ci[1] * 100).toFixed(1)} %` : 'no cases to count');

export const STANDING_WORDS: Record<TargetStanding, { text: string; severity: 'success' | 'danger' | 'warn' | 'secondary' }> = {
  meets: { text: 'Meets the target', severity: 'success' },
  misses: { text: 'Misses the target', severity: 'danger' },
  uncertain: { text: 'Too few cases to tell', severity: 'warn' },
  'no-data': { text: 'No cases yet', severity: 'secondary' },
};

export { formatDay as dateOf, formatMonth as monthLabel } from '@/components/date-format';
