import { describe, expect, it } from 'vitest';
import { byUrgency, STALE_AFTER_MS, urgencyGroup, type UrgencyFacts } from '../../../../shared/board/urgency';

// The order is the product's own rule (common practice on ED boards, no source): what needs a
// person now comes first.
const NOW = Date.UTC(2026, 11, 4, 3, 0);
const MIN = 60_000;
const base = (id: number, more: Partial<UrgencyFacts>): UrgencyFacts => ({
  id, state: 'en-route', acknowledgedAt: null, levelRose: false, overdueAt: null, decidedLevel: null,
  recommendedLevel: 'consult', etaAt: NOW + 10 * MIN, createdAt: NOW - 5 * MIN, arrivedAt: null, ...more,
});

describe('one urgency order for every board and list', () => {
  it('puts a new full-team case sent last above acknowledged cases arriving sooner', () => {
    const acknowledgedSoon = base(1, { acknowledgedAt: NOW - MIN, state: 'acknowledged', etaAt: NOW + 2 * MIN, recommendedLevel: 'full' });
    const newConsult = base(2, { etaAt: NOW + 3 * MIN });
    const newFull = base(3, { recommendedLevel: 'full', etaAt: NOW + 30 * MIN, createdAt: NOW });
    const overdueNone = base(4, { recommendedLevel: 'none', overdueAt: NOW - MIN });
    const arrived = base(5, { state: 'arrived', arrivedAt: NOW - 2 * MIN, recommendedLevel: 'full' });
    const stale = base(6, { etaAt: NOW - STALE_AFTER_MS, recommendedLevel: 'full' });
    expect(byUrgency([arrived, acknowledgedSoon, stale, newConsult, newFull, overdueNone], NOW).map((c) => c.id)).toEqual([4, 3, 2, 1, 6, 5]);
  });

  it('orders by the decided level when there is one, then by ETA, none given last', () => {
    const decidedFull = base(1, { acknowledgedAt: NOW, state: 'acknowledged', recommendedLevel: 'consult', decidedLevel: 'full', etaAt: null });
    const limitedSoon = base(2, { acknowledgedAt: NOW, state: 'acknowledged', recommendedLevel: 'limited', etaAt: NOW + MIN });
    const limitedNoEta = base(3, { acknowledgedAt: NOW, state: 'acknowledged', recommendedLevel: 'limited', etaAt: null });
    expect(byUrgency([limitedNoEta, limitedSoon, decidedFull], NOW).map((c) => c.id)).toEqual([1, 2, 3]);
  });

  it('a case becomes stale exactly 30 minutes past its ETA, not a minute before', () => {
    expect(urgencyGroup(base(1, { etaAt: NOW - STALE_AFTER_MS + MIN }), NOW)).toBe('waiting');
    expect(urgencyGroup(base(1, { etaAt: NOW - STALE_AFTER_MS }), NOW)).toBe('stale');
  });
});
