import { Router } from 'express';
import type { AppDeps } from '../deps';
import { assertHospital, requireRole, requireUser } from '../auth/guards';
import { parseOr400 } from '../errors';
import { IdParam } from './params';
import { HospitalBays } from '../../shared/schemas/bays';
import { listBays, setBays } from '../services/board/bays';

// The board's nurses and watchers read a hospital's bays; an administrator of it edits them.
const readers = ['charge_nurse', 'trauma_lead', 'admin'] as const;

export function baysRouter({ db, clock }: AppDeps): Router {
  const router = Router();
  router.get('/api/hospitals/:id/bays', requireUser(db), requireRole(...readers), async (req, res) => {
    const { id } = parseOr400(IdParam, req.params);
    assertHospital(req.me!, id);
    res.json({ bays: await listBays(db, id) });
  });
  router.put('/api/hospitals/:id/bays', requireUser(db), requireRole('admin'), async (req, res) => {
    const { id } = parseOr400(IdParam, req.params);
    res.json({ bays: await setBays(db, req.me!, id, parseOr400(HospitalBays, req.body).bays, clock.now()) });
  });
  return router;
}
