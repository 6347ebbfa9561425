import { Router } from 'express';
import type { AppDeps } from '../deps';

export function healthRouter({ db, clock }: AppDeps): Router {
  const router = Router();
  router.get('/api/health', async (_req, res) => {
    await db.raw('select 1');
    res.json({ status: 'ok', time: new Date(clock.now()).toISOString() });
  });
  return router;
}
