import { Router } from 'express';
import type { AppDeps } from '../deps';

/** How long a readiness check waits for the database or Redis before calling it failed [ours]. */
const READY_WITHIN_MS = 2000;

function within<T>(work: Promise<T>, ms: number): Promise<T> {
  let timer: NodeJS.Timeout | undefined;
  const late = new Promise<never>((_, reject) => (timer = setTimeout(() => reject(new Error(`no answer within ${ms} ms`)), ms)));
  return Promise.race([work, late]).finally(() => clearTimeout(timer));
}

const failure = (err: unknown) => `failed: ${String((err as Error)?.message ?? err).slice(0, 200)}`;

export function healthRouter({ db, clock, redis }: AppDeps): Router {
  const router = Router();
  router.get('/api/health', async (_req, res) => {
    await db.raw('select 1');
    res.json({ status: 'ok', time: new Date(clock.now()).toISOString() });
  });
  // For a load balancer: 200 while this process can serve (its database answers, and Redis when
  // the region uses it), 503 naming what failed, so traffic goes to the other processes.
  router.get('/api/health/ready', async (_req, res) => {
    const [database, shared] = await Promise.all([
      within(db.raw('select 1'), READY_WITHIN_MS).then(() => 'ok', failure),
      redis ? redis.ping(READY_WITHIN_MS).then(() => 'ok', failure) : Promise.resolve('not configured'),
    ]);
    const failed = [...(database === 'ok' ? [] : ['database']), ...(shared.startsWith('failed') ? ['redis'] : [])];
    res.status(failed.length ? 503 : 200).json({ ready: !failed.length, database, redis: shared, ...(failed.length ? { failed } : {}) });
  });
  return router;
}
