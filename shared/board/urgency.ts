import { LEVEL_RANK, type LevelId } from '../triage/policy';

// The one order of urgency, for the server's lists and every board: what needs a person now
// first. Unacknowledged cases lead (those already escalated on top), then by level (decided,
// else recommended; highest first), then by ETA (soonest first; none given last). A case long
// past its ETA and never marked arrived waits for a nurse to confirm it, below the live ones;
// arrived patients come last, in their own group.

/** Past its ETA by this much and not marked arrived, a case asks to be confirmed or closed [ours]. */
export const STALE_AFTER_MS = 30 * 60_000;

export interface UrgencyFacts {
  state: string;
  acknowledgedAt: number | null;
  levelRose: boolean;
  overdueAt: number | null;
  decidedLevel: LevelId | null;
  recommendedLevel: LevelId;
  etaAt: number | null;
  createdAt: number;
  arrivedAt: number | null;
  id: number;
}

export const URGENCY_GROUPS = ['waiting', 'open', 'stale', 'arrived'] as const;
export type UrgencyGroup = (typeof URGENCY_GROUPS)[number];

export function urgencyGroup(c: UrgencyFacts, now: number): UrgencyGroup {
  if (c.state === 'arrived' || c.arrivedAt != null) return 'arrived';
  if (c.etaAt != null && now - c.etaAt >= STALE_AFTER_MS) return 'stale';
  if (c.acknowledgedAt == null || c.levelRose) return 'waiting';
  return 'open';
}

export const isStale = (c: UrgencyFacts, now: number) => urgencyGroup(c, now) === 'stale';

const levelOf = (c: UrgencyFacts) => LEVEL_RANK[c.decidedLevel ?? c.recommendedLevel] ?? 0;

/** Negative when `a` is more urgent than `b`; a total order (the id breaks the last tie). */
export function compareUrgency(a: UrgencyFacts, b: UrgencyFacts, now: number): number {
  const ga = URGENCY_GROUPS.indexOf(urgencyGroup(a, now));
  const gb = URGENCY_GROUPS.indexOf(urgencyGroup(b, now));
  if (ga !== gb) return ga - gb;
  if (ga === 0) {
    const overdue = Number(b.overdueAt != null) - Number(a.overdueAt != null);
    if (overdue) return overdue;
  }
  const level = levelOf(b) - levelOf(a);
  if (level) return level;
  if (ga === 3) return (a.arrivedAt ?? 0) - (b.arrivedAt ?? 0) || a.id - b.id;
  const eta = (a.etaAt ?? Infinity) - (b.etaAt ?? Infinity);
  if (eta) return eta;
  return a.createdAt - b.createdAt || a.id - b.id;
}

export function byUrgency<T extends UrgencyFacts>(cases: readonly T[], now: number): T[] {
  return [...cases].sort((a, b) => compareUrgency(a, b, now));
}
