import { Router } from 'express';
import type { AppDeps } from '../deps';
import { requireUser } from '../auth/guards';

export function meRouter({ db }: AppDeps): Router {
  const router = Router();
  router.get('/api/me', requireUser(db), (req, res) => res.json(req.me));
  return router;
}
