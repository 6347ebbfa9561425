import { Router } from 'express';
import { z } from 'zod';
import { OPEN_STATES } from '../../shared/schemas/cases';
import type { AppDeps } from '../deps';
import { agencyIdsOf, hospitalIdsOf, requireRole, requireUser } from '../auth/guards';
import { parseOr400 } from '../errors';
import { CaseIdParam } from './params';
import { caseEvents, caseForReader, caseRevisions, caseSummary, listCaseSummariesPage } from '../services/cases';
import { sendJsonText } from './json-text';

const CaseListQuery = z.object({ state: z.enum(['open', 'all']).default('open') });
const CaseId = CaseIdParam;

// Crews read their agency's cases; ED staff read their hospital's. Writes go over the socket.
const readers = ['paramedic', 'charge_nurse', 'trauma_lead', 'quality', 'admin'] as const;

export function casesRouter({ db, clock, catchUp }: AppDeps): Router {
  const router = Router();
  router.get('/api/cases', requireUser(db), requireRole(...readers), async (req, res) => {
    const { state } = parseOr400(CaseListQuery, req.query);
    const me = req.me!;
    // A crew's screen reloads after every connection that did not recover: in the catch-up lane, behind pre-alerts.
    await catchUp.run(async () => {
      const at = clock.now();
      const page = await listCaseSummariesPage(db, { hospitalIds: hospitalIdsOf(me), agencyIds: agencyIdsOf(me), states: state === 'open' ? OPEN_STATES : undefined, now: at });
      // total says how many matched when the list is cut at the cap (the most urgent kept).
      sendJsonText(res, `{"cases":${page.json},"total":${page.total},"at":${at}}`);
    });
  });
  router.get('/api/cases/:id', requireUser(db), requireRole(...readers), async (req, res) => {
    const { id } = parseOr400(CaseId, req.params);
    await caseForReader(db, req.me!, id);
    res.json({ case: await caseSummary(db, id), revisions: await caseRevisions(db, id), events: await caseEvents(db, id) });
  });
  return router;
}
