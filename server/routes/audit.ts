import { Router } from 'express';
import { z } from 'zod';
import { ProgrammeEmail } from '../../shared/schemas/audit';
import type { AppDeps } from '../deps';
import { assertHospital, requireAccess, requireUser, roleFor } from '../auth/guards';
import { parseOr400 } from '../errors';
import { PROGRAMME_EMAIL_SETTING } from '../services/audit/checkpoints';
import { getSetting, setSetting } from '../services/people/settings';

export const HospitalQuery = z.object({ hospitalId: z.coerce.number({ error: 'must be a hospital number' }).int({ error: 'must be a whole number' }).positive({ error: 'must be positive' }) });

// The trauma programme's address, where the audit trail's signed checkpoints are mailed. An
// administrator sets it for the hospitals they administer.
export function auditRouter({ db, clock }: AppDeps): Router {
  const router = Router();
  const user = requireUser(db);
  const settings = requireAccess('audit.settings');

  router.get('/api/audit/programme-email', user, settings, async (req, res) => {
    const { hospitalId } = parseOr400(HospitalQuery, req.query);
    assertHospital(req.me!, hospitalId);
    res.json({ hospitalId, email: (await db('settings').where({ hospital_id: hospitalId, key: PROGRAMME_EMAIL_SETTING }).first('value')) ? await getSetting<string | null>(db, PROGRAMME_EMAIL_SETTING, hospitalId, null) : null });
  });
  router.put('/api/audit/programme-email', user, settings, async (req, res) => {
    const body = parseOr400(ProgrammeEmail, req.body);
    assertHospital(req.me!, body.hospitalId);
    await setSetting(db, PROGRAMME_EMAIL_SETTING, body.email, body.hospitalId, { actor: { id: req.me!.user.id, role: roleFor(req.me!, 'audit.settings') }, at: clock.now() });
    res.json(body);
  });
  return router;
}
