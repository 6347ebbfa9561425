import { Router } from 'express';
import { RegisterMachineClient } from '../../shared/schemas/machine-clients';
import type { AppDeps } from '../deps';
import { requireAccess, requireUser } from '../auth/guards';
import { conflict, parseOr400 } from '../errors';
import { listMachineClients, registerMachineClient, revokeMachineClient } from '../exchange/machine-clients';
import { IdParam } from './params';

/** People & places: the record and dispatch systems that send pre-alerts for an administrator's agencies. */
export function machineClientsRouter({ db, clock, config, publicUrl }: AppDeps): Router {
  const router = Router();
  const admin = [requireUser(db), requireAccess('machine-clients.manage')];
  const issuer = `${publicUrl}/idp`;
  router.get('/api/people/machine-clients', ...admin, async (req, res) => res.json({ clients: await listMachineClients(db, req.me!), tokenEndpoint: config.oidc.issuer ? null : `${issuer}/token` }));
  router.post('/api/people/machine-clients', ...admin, async (req, res) => {
    if (config.oidc.issuer) throw conflict('Machine clients are issued by the built-in identity provider; with an outside issuer, register them there.');
    const issued = await registerMachineClient(db, clock, req.me!, parseOr400(RegisterMachineClient, req.body));
    res.status(201).set('Cache-Control', 'no-store').json({ ...issued, tokenEndpoint: `${issuer}/token` });
  });
  router.post('/api/people/machine-clients/:id/revoke', ...admin, async (req, res) => res.json(await revokeMachineClient(db, clock, req.me!, parseOr400(IdParam, req.params).id)));
  return router;
}
