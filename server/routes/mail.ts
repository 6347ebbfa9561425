import { Router } from 'express';
import type { AppDeps } from '../deps';
import { requireRole, requireUser } from '../auth/guards';
import { listMail } from '../services/mail-inbox';

export function mailRouter(deps: AppDeps): Router {
  const router = Router();
  router.get('/api/mail', requireUser(deps.db), requireRole('admin'), async (req, res) => {
    res.json({ local: deps.mailer.local, messages: await listMail(deps.db, { limit: Math.min(Number(req.query.limit) || 100, 500) }) });
  });
  return router;
}
