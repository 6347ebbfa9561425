import { Router, type Request } from 'express';
import type { AppDeps } from '../deps';
import { requireAccess, requireUser } from '../auth/guards';
import { conflict, parseOr400 } from '../errors';
import { IdParam } from './params';
import { disconnectSocketsOf, refreshSocketsOf } from '../realtime/session-follow';
import { AgencyDestinations, AgencyFields, CreateUser, HospitalFields, SetPassword, UnitFields, UpdateHospital, UpdateUnit, UpdateUser } from '../../shared/schemas/people';
import * as people from '../services/people/people';

const idOf = (req: Request) => parseOr400(IdParam, req.params).id;

export function peopleRouter({ db, clock, io, config, redis }: AppDeps): Router {
  const router = Router();
  const user = requireUser(db);
  const admin = requireAccess('people.manage');
  router.get('/api/people/users', user, admin, async (req, res) => res.json(await people.listPeople(db, req.me!)));
  router.post('/api/people/users', user, admin, async (req, res) => res.status(201).json(await people.createPerson(db, req.me!, parseOr400(CreateUser, req.body), clock.now())));
  router.patch('/api/people/users/:id', user, admin, async (req, res) => {
    const person = await people.updatePerson(db, req.me!, idOf(req), parseOr400(UpdateUser, req.body), clock.now());
    // Their open sockets take the new roles and places now, not at their next connection, on
    // this process and (with Redis) on the region's others.
    await refreshSocketsOf(io, db, person.id);
    if (redis) io.serverSideEmit('person:changed', person.id);
    res.json(person);
  });
  router.post('/api/people/users/:id/password', user, admin, async (req, res) => {
    if (config.oidc.issuer) throw conflict('Passwords are kept by your identity provider; set it there.');
    const person = await people.setPassword(db, req.me!, idOf(req), parseOr400(SetPassword, req.body).password, clock.now());
    // The reset ended their sessions; whoever held them loses the sockets too.
    disconnectSocketsOf(io, person.id);
    res.json(person);
  });
  router.post('/api/people/users/:id/reactivate', user, admin, async (req, res) => res.json(await people.setPersonActive(db, req.me!, idOf(req), true, clock.now())));
  router.post('/api/people/users/:id/deactivate', user, admin, async (req, res) => {
    const person = await people.setPersonActive(db, req.me!, idOf(req), false, clock.now());
    // Sessions are gone with the commit; an open socket would otherwise keep receiving the board.
    disconnectSocketsOf(io, person.id);
    res.json(person);
  });

  router.get('/api/people/hospitals', user, admin, async (req, res) => res.json(await people.listHospitals(db, req.me!)));
  router.post('/api/people/hospitals', user, admin, async (req, res) => res.status(201).json(await people.createHospital(db, req.me!, parseOr400(HospitalFields, req.body), clock.now())));
  router.patch('/api/people/hospitals/:id', user, admin, async (req, res) => res.json(await people.updateHospital(db, req.me!, idOf(req), parseOr400(UpdateHospital, req.body), clock.now())));

  router.get('/api/people/agencies', user, admin, async (req, res) => res.json(await people.listAgencies(db, req.me!)));
  router.post('/api/people/agencies', user, admin, async (req, res) => res.status(201).json(await people.createAgency(db, req.me!, parseOr400(AgencyFields, req.body), clock.now())));
  router.patch('/api/people/agencies/:id', user, admin, async (req, res) => res.json(await people.updateAgency(db, req.me!, idOf(req), parseOr400(AgencyFields, req.body), clock.now())));
  router.post('/api/people/agencies/:id/units', user, admin, async (req, res) => res.status(201).json(await people.addUnit(db, req.me!, idOf(req), parseOr400(UnitFields, req.body).callSign, clock.now())));
  router.put('/api/people/agencies/:id/destinations', user, admin, async (req, res) => res.json(await people.setDestinations(db, req.me!, idOf(req), parseOr400(AgencyDestinations, req.body).hospitalIds, clock.now())));
  router.patch('/api/people/units/:id', user, admin, async (req, res) => res.json(await people.updateUnit(db, req.me!, idOf(req), parseOr400(UpdateUnit, req.body), clock.now())));
  return router;
}
