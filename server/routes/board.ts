import { Router, type NextFunction, type Request, type Response } from 'express';
import { z } from 'zod';
import { BOARD_ACTIONS, BOARD_CURSOR, type BoardAction } from '../../shared/schemas/board';
import type { AppDeps } from '../deps';
import { requireAccess, requireUser, roleFor } from '../auth/guards';
import { CaseRefusal, errorBody, parseOr400 } from '../errors';
import { CaseIdParam } from './params';
import { announceCase } from '../realtime/broadcast';
import { actOnCase, boardSnapshotJson } from '../services/board/board';
import { sendJsonText } from './json-text';
import { startPaging } from '../services/board/sms-paging';

export const BoardQuery = z.object({
  hospitalId: z.coerce.number({ error: 'must be a hospital number' }).int({ error: 'must be a whole number' }).positive({ error: 'must be positive' }).optional(),
  changesSince: z.string({ error: 'must be the cursor of an earlier snapshot' }).regex(BOARD_CURSOR, { error: 'must be the cursor of an earlier snapshot' }).optional(),
});
const CaseId = CaseIdParam;

export function boardRouter(deps: AppDeps): Router {
  const { db, clock, catchUp } = deps;
  const router = Router();

  router.get('/api/board', requireUser(db), requireAccess('board.read'), async (req, res) => {
    const { hospitalId, changesSince } = parseOr400(BoardQuery, req.query);
    // Every board reloads after a connection that did not recover: in the catch-up lane, behind pre-alerts.
    sendJsonText(res, await catchUp.run(() => boardSnapshotJson(db, clock, req.me!, hospitalId, changesSince)));
  });

  const act = (action: BoardAction) => async (req: Request, res: Response, next: NextFunction) => {
    try {
      const { id } = parseOr400(CaseId, req.params);
      const { summary, change } = await actOnCase(deps, { me: req.me!, role: roleFor(req.me!, 'board.act') }, id, action, req.body ?? {});
      announceCase(deps, summary, change);
      res.json({ case: summary });
      // The page by SMS (and tier 1's other entries) follows the e-mail without holding up the nurse;
      // its failures are recorded on the case and shown on the board, never thrown.
      if (action === 'page') void startPaging(deps, id, { id: req.me!.user.id, role: roleFor(req.me!, 'board.act') });
    } catch (err) {
      // The loser of a race gets the case as it now stands in the refusal (errorBody), so its board
      // agrees with the winner's; a failed page is also news for every other board.
      if (err instanceof CaseRefusal && err.code === 'page_failed') announceCase(deps, err.summary, { kind: 'page-failed', at: err.summary.updatedAt, by: req.me!.user.name });
      next(err);
    }
  };
  for (const action of BOARD_ACTIONS) router.post(`/api/cases/:id/${action}`, requireUser(db), requireAccess('board.act'), act(action));
  return router;
}
