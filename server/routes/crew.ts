import { Router } from 'express';
import type { AppDeps } from '../deps';
import { requireRole, requireUser } from '../auth/guards';
import { crewDestinations } from '../services/cases/crew';

export function crewRouter({ db, clock }: AppDeps): Router {
  const router = Router();
  router.get('/api/crew/destinations', requireUser(db), requireRole('paramedic'), async (req, res) => res.json(await crewDestinations(db, req.me!, clock.now())));
  return router;
}
