import { Router } from 'express';
import type { AppDeps } from '../deps';
import { requireAccess, requireUser } from '../auth/guards';
import { crewDestinations } from '../services/cases/crew';

export function crewRouter({ db, clock }: AppDeps): Router {
  const router = Router();
  router.get('/api/crew/destinations', requireUser(db), requireAccess('pre-alerts.send'), async (req, res) => res.json(await crewDestinations(db, req.me!, clock.now())));
  return router;
}
