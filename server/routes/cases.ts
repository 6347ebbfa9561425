import { Router } from 'express';
import { z } from 'zod';
import { OPEN_STATES } from '../../shared/schemas/cases';
import type { AppDeps } from '../deps';
import { agencyIdsOf, hospitalIdsOf, requireAccess, requireUser } from '../auth/guards';
import { parseOr400 } from '../errors';
import { CaseIdParam } from './params';
import { caseEvents, caseForReader, caseRevisions } from '../services/cases/queries';
import { caseSummary, listCaseSummariesPage } from '../services/cases/summary';
import { sendJsonText } from './json-text';
import { crewEvents, crewView, readsAsCrew } from '../services/cases/crew';
import type { CaseSummary } from '../../shared/schemas/cases';

export const CaseListQuery = z.object({ state: z.enum(['open', 'all']).default('open') });
const CaseId = CaseIdParam;

// Crews read their agency's cases; ED staff read their hospital's. Writes go over the socket.

export function casesRouter({ db, clock, catchUp }: AppDeps): Router {
  const router = Router();
  router.get('/api/cases', requireUser(db), requireAccess('cases.read'), async (req, res) => {
    const { state } = parseOr400(CaseListQuery, req.query);
    const me = req.me!;
    // A crew's screen reloads after every connection that did not recover: in the catch-up lane, behind pre-alerts.
    await catchUp.run(async () => {
      const at = clock.now();
      const filter = { hospitalIds: hospitalIdsOf(me), agencyIds: agencyIdsOf(me), states: state === 'open' ? OPEN_STATES : undefined, now: at };
      // total says how many matched when the list is cut at the cap (the most urgent kept).
      const page = await listCaseSummariesPage(db, filter);
      if (!me.memberships.some((m) => m.kind === 'agency')) {
        sendJsonText(res, `{"cases":${page.json},"total":${page.total},"at":${at}}`);
        return;
      }
      // A crew member reads their agency's cases as the crew sees them.
      const cases = (JSON.parse(page.json) as CaseSummary[]).map((summary) => (readsAsCrew(me, summary) ? crewView(summary) : summary));
      res.json({ cases, total: page.total, at });
    });
  });
  router.get('/api/cases/:id', requireUser(db), requireAccess('cases.read'), async (req, res) => {
    const { id } = parseOr400(CaseId, req.params);
    await caseForReader(db, req.me!, id);
    const summary = await caseSummary(db, id);
    const events = await caseEvents(db, id);
    if (readsAsCrew(req.me!, summary)) res.json({ case: crewView(summary), revisions: await caseRevisions(db, id), events: crewEvents(events) });
    else res.json({ case: summary, revisions: await caseRevisions(db, id), events });
  });
  return router;
}
