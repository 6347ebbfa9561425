import { Router, type Request, type RequestHandler } from 'express';
import { z } from 'zod';
import type { AppDeps } from '../deps';
import { requireAccess, requireUser } from '../auth/guards';
import { AppError, errorBody, parseOr400 } from '../errors';
import { isLimiterAnswer, memoryLimiterStore } from '../limits';
import { IdParam } from './params';
import { ApproveVersion, CreateDraft, LocalPreviewQuery, PublishVersion, SaveDraft } from '../../shared/schemas/policies';
import { previewLocalCondition } from '../services/policies/local-criteria';
import { approveVersion, createDraft, discardDraft, getPolicyVersion, listPolicyVersions, publishVersion, saveDraft } from '../services/policies/policies';

export const HospitalQuery = z.object({ hospitalId: z.coerce.number({ error: 'must be a number' }).int().positive() });
const idOf = (req: Request) => parseOr400(IdParam, req.params).id;

export function policiesRouter({ db, clock, limiterStore = memoryLimiterStore }: AppDeps): Router {
  const router = Router();
  const user = requireUser(db);
  const readers = requireAccess('policies.read');
  const drafters = requireAccess('policies.draft');
  router.get('/api/policies', user, readers, async (req, res) => res.json(await listPolicyVersions(db, req.me!, parseOr400(HospitalQuery, req.query).hospitalId, clock.now())));
  // Each preview reads up to 20,000 past cases; the form asks at most every 0.4 s while a person types [ours].
  const previewLimit = limiterStore({ keyPrefix: 'policy-preview', points: 120, duration: 60 });
  const previews: RequestHandler = async (req, res, next) => {
    try {
      await previewLimit.consume(`user:${req.me!.user.id}`);
      next();
    } catch (err) {
      if (!isLimiterAnswer(err)) return next(err);
      res.set('Retry-After', String(Math.ceil(err.msBeforeNext / 1000)));
      next(new AppError(429, 'too_many', 'Too many previews in a minute; wait a moment and try again.'));
    }
  };
  router.post('/api/policies/local-preview', user, readers, previews, async (req, res) => res.json(await previewLocalCondition(db, req.me!, parseOr400(LocalPreviewQuery, req.body))));
  router.get('/api/policies/:id', user, readers, async (req, res) => res.json(await getPolicyVersion(db, req.me!, idOf(req), clock.now())));
  router.post('/api/policies', user, drafters, async (req, res) => res.status(201).json(await createDraft(db, req.me!, parseOr400(CreateDraft, req.body), clock.now())));
  router.put('/api/policies/:id', user, drafters, async (req, res) => res.json(await saveDraft(db, req.me!, idOf(req), parseOr400(SaveDraft, req.body), clock.now())));
  router.delete('/api/policies/:id', user, drafters, async (req, res) => {
    await discardDraft(db, req.me!, idOf(req), clock.now());
    res.status(204).end();
  });
  router.post('/api/policies/:id/approve', user, requireAccess('policies.approve'), async (req, res) => res.json(await approveVersion(db, req.me!, idOf(req), parseOr400(ApproveVersion, req.body ?? {}), clock.now())));
  router.post('/api/policies/:id/publish', user, requireAccess('policies.publish'), async (req, res) => res.json(await publishVersion(db, req.me!, idOf(req), parseOr400(PublishVersion, req.body ?? {}), clock.now())));
  return router;
}
