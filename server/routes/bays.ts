import { Router } from 'express';
import type { AppDeps } from '../deps';
import { assertHospital, requireAccess, requireUser } from '../auth/guards';
import { parseOr400 } from '../errors';
import { IdParam } from './params';
import { HospitalBays } from '../../shared/schemas/bays';
import { listBays, setBays } from '../services/board/bays';

export function baysRouter({ db, clock }: AppDeps): Router {
  const router = Router();
  router.get('/api/hospitals/:id/bays', requireUser(db), requireAccess('board.read'), async (req, res) => {
    const { id } = parseOr400(IdParam, req.params);
    assertHospital(req.me!, id);
    res.json({ bays: await listBays(db, id) });
  });
  router.put('/api/hospitals/:id/bays', requireUser(db), requireAccess('bays.edit'), async (req, res) => {
    const { id } = parseOr400(IdParam, req.params);
    res.json({ bays: await setBays(db, req.me!, id, parseOr400(HospitalBays, req.body).bays, clock.now()) });
  });
  return router;
}
