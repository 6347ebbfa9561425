import { Router, type Request } from 'express';
import { z } from 'zod';
import type { AppDeps } from '../deps';
import { assertHospital, hospitalIdsOf, requireAccess, requireUser } from '../auth/guards';
import { parseOr400 } from '../errors';
import { IdParam } from './params';
import { PagingContact, PagingPlan } from '../../shared/schemas/paging';
import { dayEnd, dayStart, runtimeTimeZone } from '../../shared/days';
import { scopeHospitals } from '../services/review/reviews';
import { listMessages } from '../services/messages/messages';
import { boardPaging, getPagingPlan, hospitalPeople, pageToFirstComing, savePagingPlan, setContact } from '../services/board/sms-paging';

const idOf = (req: Request) => parseOr400(IdParam, req.params).id;
export const HospitalQuery = z.object({ hospitalId: z.coerce.number({ error: 'must be a hospital number' }).int({ error: 'must be a whole number' }).positive({ error: 'must be positive' }) });
export const IntervalQuery = z.object({
  hospitalId: HospitalQuery.shape.hospitalId.optional(),
  from: z.iso.date({ error: 'must be a date (YYYY-MM-DD)' }).optional(),
  to: z.iso.date({ error: 'must be a date (YYYY-MM-DD)' }).optional(),
  days: z.coerce.number({ error: 'must be a number of days' }).int({ error: 'must be whole days' }).min(1, { error: 'must be at least 1' }).max(3660, { error: 'must be at most 3660' }).default(90),
});
export const Limit = z.object({ limit: z.coerce.number({ error: 'must be a number' }).int({ error: 'must be a whole number' }).min(1, { error: 'must be at least 1' }).max(500, { error: 'must be at most 500' }).default(200) });

export function pagingRouter(deps: AppDeps): Router {
  const { db, clock, sms, mailer } = deps;
  const router = Router();
  const user = requireUser(db);
  const admin = requireAccess('paging.manage');

  const settings = async (hospitalId: number) => ({
    plan: await getPagingPlan(db, hospitalId),
    people: await hospitalPeople(db, hospitalId),
    sms: { local: sms.local, from: sms.from },
  });
  router.get('/api/paging/hospitals/:id', user, admin, async (req, res) => {
    const id = idOf(req);
    assertHospital(req.me!, id);
    res.json(await settings(id));
  });
  router.put('/api/paging/hospitals/:id/plan', user, admin, async (req, res) => {
    const id = idOf(req);
    assertHospital(req.me!, id);
    await savePagingPlan(db, req.me!, id, parseOr400(PagingPlan, req.body), clock.now());
    res.json(await settings(id));
  });
  router.put('/api/paging/contacts/:id', user, admin, async (req, res) => res.json(await setContact(db, req.me!, idOf(req), parseOr400(PagingContact, req.body), clock.now())));

  router.get('/api/paging/board', user, requireAccess('board.read'), async (req, res) => {
    res.json(await boardPaging(db, req.me!, parseOr400(HospitalQuery, req.query).hospitalId));
  });
  router.get('/api/paging/intervals', user, requireAccess('review.read'), async (req, res) => {
    const q = parseOr400(IntervalQuery, req.query);
    // Days in the server's own zone: the query names none.
    const to = q.to ? dayEnd(q.to, runtimeTimeZone()) - 1 : clock.now();
    const from = q.from ? dayStart(q.from, runtimeTimeZone()) : to - q.days * 86_400_000;
    res.json(await pageToFirstComing(db, scopeHospitals(req.me!, q.hospitalId), { from, to }));
  });

  // Everything sent, e-mail and SMS, for the admin's own hospitals.
  router.get('/api/messages', user, requireAccess('messages.read'), async (req, res) => {
    const { limit } = parseOr400(Limit, req.query);
    res.json({ mailLocal: mailer.local, smsLocal: sms.local, smsFakeUrl: sms.fakeUrl, messages: await listMessages(db, { hospitalIds: hospitalIdsOf(req.me!), limit }) });
  });
  return router;
}
