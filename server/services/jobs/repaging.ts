import type { Job } from './job';
import { getPagingPlan, sendRound, type PagingDeps } from '../board/sms-paging';
import { OPEN_STATES } from '../../../shared/schemas/cases';
import { PAGED_LEVELS, type PagedLevel } from '../../../shared/schemas/paging';

// Re-paging the team: when nobody has answered "on my way" within the level's minutes, the same
// tier is paged again (as many times as the hospital set), then the next tier, up to the last
// tier that names anyone. A nurse's new page starts again at tier 1.

export const REPAGING_CHECK_MS = 15_000;

/** Sends every round that is due; returns the cases paged again. Tests call it on a fake clock. */
export async function runRepaging(deps: PagingDeps): Promise<number[]> {
  const { db, clock } = deps;
  const now = clock.now();
  const cases = await db('cases as c')
    .whereIn('c.state', OPEN_STATES as string[])
    .whereNotNull('c.paged_at')
    .whereIn('c.decided_level', PAGED_LEVELS as readonly string[] as string[])
    .whereNotExists((q) => q.select(db.raw('1')).from('page_replies as r').whereRaw("r.case_id = c.id AND r.answer = 'coming' AND r.at >= c.paged_at"))
    .select('c.id', 'c.hospital_id', 'c.decided_level', 'c.paged_at');
  const paged: number[] = [];
  for (const c of cases) {
    const last = await db('page_rounds').where({ case_id: c.id, paged_at: c.paged_at }).orderBy('id', 'desc').first('tier', 'round', 'at');
    const current = last ? { tier: Number(last.tier), round: Number(last.round), at: Number(last.at) } : { tier: 1, round: 1, at: Number(c.paged_at) };
    const plan = (await getPagingPlan(db, c.hospital_id)).levels[c.decided_level as PagedLevel];
    if (now - current.at < plan.minutes * 60_000) continue;
    let next: { tier: number; round: number } | null = null;
    if (current.round <= plan.repeats) next = { tier: current.tier, round: current.round + 1 };
    else {
      const tier = plan.tiers.findIndex((entries, i) => i + 1 > current.tier && entries.length > 0);
      if (tier >= 0) next = { tier: tier + 1, round: 1 };
    }
    if (!next) continue; // the last tier has had its rounds: the board shows nobody is coming
    if (await sendRound(deps, c.id, next.tier, next.round, { withLevelList: next.tier === 1 })) paged.push(c.id);
  }
  return paged;
}

export function repagingJob(deps: PagingDeps, everyMs = REPAGING_CHECK_MS): Job {
  let running = false;
  let stopped = false;
  const tick = async () => {
    if (running || stopped) return;
    running = true;
    try {
      await runRepaging(deps);
    } catch (err) {
      deps.logger.error({ err }, 're-paging check failed');
    } finally {
      running = false;
    }
  };
  const timer = setInterval(tick, everyMs);
  timer.unref?.();
  return { stop: () => { stopped = true; clearInterval(timer); } };
}
