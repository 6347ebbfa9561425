import { Router, type Request } from 'express';
import { z } from 'zod';
import { CloseDiscussion, ComplianceQuery, FlagForPeerReview, ResponseSettings, ReviewListQuery, SignOff, type ReviewRow } from '../../shared/schemas/review';
import type { AppDeps } from '../deps';
import { assertHospital, requireAccess, requireUser, roleFor } from '../auth/guards';
import { parseOr400 } from '../errors';
import { IdParam } from './params';
import { auditChainFor } from '../services/audit/scope';
import { complianceReport } from '../services/review/compliance';
import { toCsv, type CsvColumn } from '../services/quality/csv';
import { allReviewCases, caseTimeline, closeDiscussion, discussionList, listReviewCases, reviewCase, scopeHospitals } from '../services/review/reviews';
import { getSetting, setSetting } from '../services/people/settings';

export const HospitalQuery = z.object({ hospitalId: z.coerce.number({ error: 'must be a hospital number' }).int({ error: 'must be a whole number' }).positive({ error: 'must be positive' }).optional() });
const idOf = (req: Request) => parseOr400(IdParam, req.params).id;

const iso = (ms: number | null) => (ms == null ? null : new Date(ms).toISOString());

// Level ids and plain names side by side, so the sheet sorts and reads both ways.
function csvColumns(levelNames: Record<number, Record<string, string>>): CsvColumn<ReviewRow>[] {
  const name = (row: ReviewRow, level: string | null) => (level == null ? '' : levelNames[row.hospital.id]?.[level] ?? level);
  return [
    { header: 'case', value: (r) => r.caseNumber },
    { header: 'pre-alert at (UTC)', value: (r) => iso(r.createdAt) },
    { header: 'hospital', value: (r) => r.hospital.name },
    { header: 'agency', value: (r) => r.agency },
    { header: 'unit', value: (r) => r.unit },
    { header: 'state', value: (r) => r.state },
    { header: 'recommended level', value: (r) => r.recommendedLevel },
    { header: 'recommended level name', value: (r) => name(r, r.recommendedLevel) },
    { header: 'decided level', value: (r) => r.decidedLevel },
    { header: 'decided level name', value: (r) => name(r, r.decidedLevel) },
    { header: 'decided by', value: (r) => r.decidedBy },
    { header: 'reason', value: (r) => r.decidedReason },
    { header: 'decided below recommendation', value: (r) => (r.below ? 'yes' : 'no') },
    { header: 'minutes to acknowledge', value: (r) => r.ackMinutes },
    { header: 'acknowledgement overdue', value: (r) => (r.ackOverdue ? 'yes' : 'no') },
    { header: 'minutes arrival to team', value: (r) => r.teamMinutes },
    { header: 'team over target', value: (r) => (r.teamSlow ? 'yes' : 'no') },
    { header: 'review', value: (r) => r.review },
    { header: 'reviewed by', value: (r) => r.reviewedBy },
  ];
}

// Trauma lead and administrator review; the quality team reads. Every answer is limited to the
// caller's own hospitals (403 for another's).
export function reviewRouter({ db, clock }: AppDeps): Router {
  const router = Router();
  const user = requireUser(db);
  const readers = requireAccess('review.read');
  const reviewers = requireAccess('review.write');

  router.get('/api/review/cases', user, readers, async (req, res) => res.json(await listReviewCases(db, req.me!, parseOr400(ReviewListQuery, req.query), clock.now())));
  router.get('/api/review/cases.csv', user, readers, async (req, res) => {
    const { rows, levelNames } = await allReviewCases(db, req.me!, parseOr400(ReviewListQuery, req.query), clock.now());
    const stamp = new Date(clock.now()).toISOString().slice(0, 10);
    res.type('text/csv; charset=utf-8').attachment(`activation-review-${stamp}.csv`).send('\uFEFF' + toCsv(rows, csvColumns(levelNames)));
  });
  router.get('/api/review/cases/:id', user, readers, async (req, res) => res.json(await caseTimeline(db, req.me!, idOf(req), clock.now())));
  router.post('/api/review/cases/:id/sign-off', user, reviewers, async (req, res) => res.status(201).json(await reviewCase(db, req.me!, idOf(req), 'sign-off', parseOr400(SignOff, req.body ?? {}).comment, clock.now())));
  router.post('/api/review/cases/:id/flag', user, reviewers, async (req, res) => res.status(201).json(await reviewCase(db, req.me!, idOf(req), 'flag', parseOr400(FlagForPeerReview, req.body ?? {}).comment, clock.now())));
  router.get('/api/review/discussion', user, readers, async (req, res) => res.json({ items: await discussionList(db, req.me!, parseOr400(HospitalQuery, req.query).hospitalId) }));
  router.post('/api/review/reviews/:id/close', user, reviewers, async (req, res) => res.json(await closeDiscussion(db, req.me!, idOf(req), parseOr400(CloseDiscussion, req.body ?? {}).outcome, clock.now())));
  router.get('/api/review/compliance', user, readers, async (req, res) => res.json(await complianceReport(db, req.me!, parseOr400(ComplianceQuery, req.query))));
  router.get('/api/review/audit-chain', user, readers, async (req, res) => res.json(await auditChainFor(db, req.me!, clock.now())));
  router.get('/api/review/settings', user, readers, async (req, res) => {
    const [hospitalId] = scopeHospitals(req.me!, parseOr400(HospitalQuery, req.query).hospitalId);
    res.json({ hospitalId, targetMinutes: await getSetting<number>(db, 'response.targetMinutes', hospitalId), compliance: await getSetting<number>(db, 'response.compliance', hospitalId) });
  });
  router.put('/api/review/settings', user, requireAccess('review.settings'), async (req, res) => {
    const body = parseOr400(ResponseSettings, req.body);
    assertHospital(req.me!, body.hospitalId);
    const audit = { actor: { id: req.me!.user.id, role: roleFor(req.me!, 'review.settings') }, at: clock.now() };
    await db.transaction(async (trx) => {
      await setSetting(trx, 'response.targetMinutes', body.targetMinutes, body.hospitalId, audit);
      await setSetting(trx, 'response.compliance', body.compliance, body.hospitalId, audit);
    });
    res.json(body);
  });
  return router;
}
