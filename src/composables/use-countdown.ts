import { computed, type MaybeRefOrGetter, toValue } from 'vue';
import dayjs from 'dayjs';
import type { CaseSummary } from '@shared/schemas/cases';

/** A time of day on a board card: "03:12"; empty when there is none. */
export const clockTime = (at: number | null | undefined): string => (at == null ? '' : dayjs(at).format('HH:mm'));

/**
 * A case's clock on the board, counted against `now` (the server's clock as the board keeps it,
 * so a wall screen with a wrong clock still reads true): time to the ETA, time past it, or when
 * the patient arrived; and "just now" / "4 min ago" for the card's other times.
 */
export function useCountdown(summary: MaybeRefOrGetter<CaseSummary>, now: MaybeRefOrGetter<number>) {
  const minutesSince = (at: number): number => Math.max(0, Math.floor((toValue(now) - at) / 60_000));
  const ago = (at: number): string => (minutesSince(at) === 0 ? 'just now' : `${minutesSince(at)} min ago`);

  const countdown = computed(() => {
    const c = toValue(summary);
    if (c.arrivedAt) return { big: clockTime(c.arrivedAt), small: `arrived ${ago(c.arrivedAt)}`, late: false };
    if (c.etaAt == null) return { big: '—', small: 'no ETA given', late: false };
    const left = Math.round((c.etaAt - toValue(now)) / 1000);
    const abs = Math.abs(left);
    const mmss = `${Math.floor(abs / 60)}:${String(abs % 60).padStart(2, '0')}`;
    return left >= 0
      ? { big: mmss, small: `until ETA ${clockTime(c.etaAt)}`, late: false }
      : { big: `+${mmss}`, small: `past ETA ${clockTime(c.etaAt)}`, late: true };
  });

  return { countdown, minutesSince, ago };
}
