import { Router } from 'express';
import { z } from 'zod';
import type { AppDeps } from '../deps';
import { hospitalIdsOf, requireAccess, requireUser } from '../auth/guards';
import { listMail } from '../services/messages/inbox';
import { parseOr400 } from '../errors';

export const MailQuery = z.object({ limit: z.coerce.number({ error: 'must be a number' }).int({ error: 'must be a whole number' }).min(1, { error: 'must be at least 1' }).max(500, { error: 'must be at most 500' }).default(100) });

export function mailRouter(deps: AppDeps): Router {
  const router = Router();
  router.get('/api/mail', requireUser(deps.db), requireAccess('messages.read'), async (req, res) => {
    const { limit } = parseOr400(MailQuery, req.query);
    res.json({ local: deps.mailer.local, messages: await listMail(deps.db, { limit, hospitalIds: hospitalIdsOf(req.me!) }) });
  });
  return router;
}
