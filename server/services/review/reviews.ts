import type { Knex } from 'knex';
import type { Me } from '../../../shared/roles';
import type { CaseState } from '../../../shared/schemas/cases';
import type {
  CaseReviewState, CaseTimeline, DiscussionItem, IntervalView, ReviewFilters, ReviewListPage, ReviewListQuery, ReviewRow, ReviewSortKey, ReviewStatus, ReviewView, TimelineRevision,
} from '../../../shared/schemas/review';
import { LEVEL_IDS, LEVEL_RANK, type LevelId } from '../../../shared/triage/policy';
import { assertHospital, hospitalIdsOf, may, roleFor } from '../../auth/guards';
import { conflict, forbidden, notFound } from '../../errors';
import { recordCaseEvent, type Actor } from '../audit/audit';
import { caseEvents, caseRevisions } from '../cases/queries';
import { caseSummary } from '../cases/summary';
import { levelsOfCase, policyInForce } from '../policies/policies';
import { getSetting } from '../people/settings';
import { dayEnd, dayStart } from '../../../shared/days';

// The trauma lead's side of a case: the filtered table, the timeline and the review work.
// Readers are the trauma lead, the administrator and the quality team of the case's hospital;
// only the first two write reviews.

const MINUTE = 60_000;
const rankSql = (column: string) => `CASE ${column} ${LEVEL_IDS.map((id) => `WHEN '${id}' THEN ${LEVEL_RANK[id]}`).join(' ')} END`;
const ACK_MS = '(c.acknowledged_at - c.created_at)';
const TEAM_MS = '(c.team_at_bedside_at - c.arrived_at)';
const REVIEW_STATE = "COALESCE(lr.status, 'unreviewed')";
// A case not acknowledged within the hospital's escalation minutes, or one the board escalated.
const OVERDUE_SQL = `(c.overdue_at IS NOT NULL OR (c.acknowledged_at IS NOT NULL AND ${ACK_MS} > h.escalation_minutes * ${MINUTE}))`;

const SORT_SQL: Record<ReviewSortKey, string> = {
  createdAt: 'c.created_at',
  caseNumber: 'c.id',
  hospital: 'h.name',
  recommended: rankSql('c.recommended_level'),
  decided: rankSql('c.decided_level'),
  state: 'c.state',
  ackMinutes: ACK_MS,
  teamMinutes: TEAM_MS,
  review: REVIEW_STATE,
};

/** Day boundaries in the reader's time zone: from the start of `from` to the end of `to`. */
export function rangeOf(q: { from?: string; to?: string; timeZone: string }): { start: number | null; end: number | null } {
  return {
    start: q.from ? dayStart(q.from, q.timeZone) : null,
    end: q.to ? dayEnd(q.to, q.timeZone) : null,
  };
}

/** The hospitals this reader may see, narrowed to one when asked (403 if it is not theirs). */
export function scopeHospitals(me: Me, hospitalId?: number): number[] {
  if (hospitalId !== undefined) {
    assertHospital(me, hospitalId);
    return [hospitalId];
  }
  const ids = hospitalIdsOf(me);
  if (!ids.length) throw forbidden('You are not a member of any hospital.');
  return ids;
}

export async function responseTargets(db: Knex, hospitalIds: number[]): Promise<Map<number, number>> {
  const targets = new Map<number, number>();
  for (const id of hospitalIds) targets.set(id, await getSetting<number>(db, 'response.targetMinutes', id));
  return targets;
}

function namesOf(levels: readonly { id: LevelId; name: string }[]): Record<LevelId, string> {
  const names = Object.fromEntries(LEVEL_IDS.map((id) => [id, id])) as Record<LevelId, string>;
  for (const level of levels) names[level.id] = level.name;
  return names;
}

export async function levelNamesOf(db: Knex, hospitalId: number, at: number): Promise<Record<LevelId, string>> {
  return namesOf((await policyInForce(db, hospitalId, at)).levels);
}

function filteredCases(db: Knex, hospitalIds: number[], filters: ReviewFilters, targets: Map<number, number>) {
  const query = db('cases as c')
    .join('hospitals as h', 'h.id', 'c.hospital_id')
    .join('agencies as a', 'a.id', 'c.agency_id')
    .leftJoin('units as u', 'u.id', 'c.unit_id')
    .leftJoin('users as dec', 'dec.id', 'c.decided_by')
    .leftJoin('reviews as lr', 'lr.id', db.raw('(SELECT MAX(r2.id) FROM reviews r2 WHERE r2.case_id = c.id)'))
    .leftJoin('users as rv', 'rv.id', db.raw('COALESCE(lr.closed_by, lr.reviewer_id)'))
    .whereIn('c.hospital_id', hospitalIds);
  const { start, end } = rangeOf(filters);
  if (start !== null) query.where('c.created_at', '>=', start);
  if (end !== null) query.where('c.created_at', '<', end);
  if (filters.decided === 'undecided') query.whereNull('c.decided_level');
  else if (filters.decided) query.where('c.decided_level', filters.decided);
  if (filters.differs) query.whereNotNull('c.decided_level').whereRaw('c.decided_level <> c.recommended_level');
  if (filters.below) query.whereNotNull('c.decided_level').whereRaw(`${rankSql('c.decided_level')} < ${rankSql('c.recommended_level')}`);
  if (filters.overdue) query.whereRaw(OVERDUE_SQL);
  if (filters.slowTeam) {
    const perHospital = [...targets].map(() => 'WHEN ? THEN CAST(? AS BIGINT)').join(' ');
    query.whereNotNull('c.team_at_bedside_at').whereNotNull('c.arrived_at')
      .whereRaw(`${TEAM_MS} > (CASE c.hospital_id ${perHospital} END) * ${MINUTE}`, [...targets].flat());
  }
  if (filters.review) query.whereRaw(`${REVIEW_STATE} = ?`, [filters.review]);
  return query;
}

const minutesBetween = (from: unknown, to: unknown) => (from == null || to == null ? null : Math.round(((Number(to) - Number(from)) / MINUTE) * 10) / 10);

function toRow(r: Record<string, any>, targets: Map<number, number>): ReviewRow {
  const ackMinutes = minutesBetween(r.created_at, r.acknowledged_at);
  const teamMinutes = minutesBetween(r.arrived_at, r.team_at_bedside_at);
  const recommended = r.recommended_level as LevelId;
  const decided = (r.decided_level ?? null) as LevelId | null;
  return {
    id: r.id,
    caseNumber: r.case_number,
    state: r.state as CaseState,
    hospital: { id: r.hospital_id, name: r.hospital_name },
    agency: r.agency_name,
    unit: r.call_sign ?? null,
    createdAt: Number(r.created_at),
    recommendedLevel: recommended,
    decidedLevel: decided,
    decidedReason: r.decided_reason ?? null,
    decidedBy: r.decided_by_name ?? null,
    differs: decided !== null && decided !== recommended,
    below: decided !== null && LEVEL_RANK[decided] < LEVEL_RANK[recommended],
    ackMinutes,
    ackOverdue: r.overdue_at != null || (r.acknowledged_at != null && Number(r.acknowledged_at) - Number(r.created_at) > r.escalation_minutes * MINUTE),
    teamMinutes,
    teamSlow: r.team_at_bedside_at != null && r.arrived_at != null && Number(r.team_at_bedside_at) - Number(r.arrived_at) > (targets.get(r.hospital_id) ?? 15) * MINUTE,
    review: (r.review_state ?? 'unreviewed') as CaseReviewState,
    reviewedBy: r.reviewed_by_name ?? null,
  };
}

const ROW_COLUMNS = [
  'c.id', 'c.case_number', 'c.state', 'c.hospital_id', 'c.created_at', 'c.recommended_level', 'c.decided_level', 'c.decided_reason',
  'c.acknowledged_at', 'c.overdue_at', 'c.arrived_at', 'c.team_at_bedside_at', 'h.name as hospital_name', 'h.escalation_minutes',
  'a.name as agency_name', 'u.call_sign', 'dec.name as decided_by_name', 'rv.name as reviewed_by_name',
];

/** One page of the review table, sorted on the server by a whitelisted column (nulls last). */
export async function listReviewCases(db: Knex, me: Me, q: ReviewListQuery, at: number): Promise<ReviewListPage> {
  const hospitalIds = scopeHospitals(me, q.hospitalId);
  const targets = await responseTargets(db, hospitalIds);
  const counted = await filteredCases(db, hospitalIds, q, targets).count({ n: 'c.id' }).first();
  const total = Number(counted?.n ?? 0);
  const sortSql = SORT_SQL[q.sort];
  const dir = q.dir === 'asc' ? 'ASC' : 'DESC';
  const rows = await filteredCases(db, hospitalIds, q, targets)
    .select(...ROW_COLUMNS, db.raw(`${REVIEW_STATE} as review_state`))
    .orderByRaw(`${sortSql} IS NULL, ${sortSql} ${dir}, c.id ${dir}`)
    .limit(q.pageSize)
    .offset((q.page - 1) * q.pageSize);
  const levelNames: ReviewListPage['levelNames'] = {};
  for (const id of hospitalIds) levelNames[id] = await levelNamesOf(db, id, at);
  return { rows: rows.map((r) => toRow(r, targets)), total, page: q.page, pageSize: q.pageSize, sort: q.sort, dir: q.dir, levelNames };
}

/** Every row the filters select, for the export (bounded so a mistaken request stays small). */
export async function allReviewCases(db: Knex, me: Me, q: ReviewListQuery, at: number, limit = 20_000): Promise<{ rows: ReviewRow[]; levelNames: ReviewListPage['levelNames'] }> {
  const hospitalIds = scopeHospitals(me, q.hospitalId);
  const targets = await responseTargets(db, hospitalIds);
  const sortSql = SORT_SQL[q.sort];
  const dir = q.dir === 'asc' ? 'ASC' : 'DESC';
  const rows = await filteredCases(db, hospitalIds, q, targets)
    .select(...ROW_COLUMNS, db.raw(`${REVIEW_STATE} as review_state`))
    .orderByRaw(`${sortSql} IS NULL, ${sortSql} ${dir}, c.id ${dir}`)
    .limit(limit);
  const levelNames: ReviewListPage['levelNames'] = {};
  for (const id of hospitalIds) levelNames[id] = await levelNamesOf(db, id, at);
  return { rows: rows.map((r) => toRow(r, targets)), levelNames };
}

interface ReviewRecord {
  id: number; case_id: number; status: ReviewStatus; comment: string | null; outcome: string | null; reviewer_id: number;
  created_at: number; closed_by: number | null; closed_at: number | null; reviewer_name?: string; closed_by_name?: string | null;
}

const toReview = (r: ReviewRecord): ReviewView => ({
  id: r.id,
  status: r.status,
  comment: r.comment,
  outcome: r.outcome,
  reviewer: r.reviewer_name ?? 'unknown',
  createdAt: Number(r.created_at),
  closedBy: r.closed_by_name ?? null,
  closedAt: r.closed_at == null ? null : Number(r.closed_at),
});

function reviewsQuery(db: Knex) {
  return db('reviews as r')
    .join('users as rv', 'rv.id', 'r.reviewer_id')
    .leftJoin('users as cb', 'cb.id', 'r.closed_by')
    .select('r.*', 'rv.name as reviewer_name', 'cb.name as closed_by_name');
}

export async function caseReviews(db: Knex, caseId: number): Promise<ReviewView[]> {
  const rows: ReviewRecord[] = await reviewsQuery(db).where('r.case_id', caseId).orderBy('r.id');
  return rows.map(toReview);
}

/** The case, if this person belongs to its hospital: 404 when there is none, 403 when it is another's. */
async function caseForHospitalReader(db: Knex, me: Me, caseId: number) {
  const row = await db('cases as c').join('hospitals as h', 'h.id', 'c.hospital_id').where('c.id', caseId).first('c.*', 'h.escalation_minutes');
  if (!row) throw notFound('That case');
  if (!hospitalIdsOf(me).includes(row.hospital_id)) throw forbidden('That case belongs to another hospital.');
  return row;
}

const REVIEW_OPENS: readonly CaseState[] = ['arrived', 'closed', 'cancelled'];
const blockedReason = (state: CaseState) =>
  REVIEW_OPENS.includes(state) ? null : 'The patient has not arrived yet; review opens once the case has arrived, been closed or been cancelled.';

function intervalsOf(row: Record<string, any>, responseMinutes: number): IntervalView[] {
  const make = (id: IntervalView['id'], label: string, from: unknown, to: unknown, targetMinutes: number | null, note: string | null = null): IntervalView => {
    const minutes = minutesBetween(from, to);
    return { id, label, from: from == null ? null : Number(from), to: to == null ? null : Number(to), minutes, targetMinutes, met: minutes === null || targetMinutes === null ? null : minutes <= targetMinutes, note };
  };
  const ack = make('pre-alert-to-acknowledged', 'Pre-alert to acknowledged', row.created_at, row.acknowledged_at, row.escalation_minutes,
    row.overdue_at != null ? 'Escalated on the board as overdue.' : null);
  if (row.overdue_at != null) ack.met = false;
  const team = make('arrival-to-team', 'Arrival to team leader at the bedside', row.arrived_at, row.team_at_bedside_at, responseMinutes,
    row.decided_level === 'full' ? null : 'The response standard applies to the highest level; shown for reference.');
  return [
    ack,
    make('pre-alert-to-decided', 'Pre-alert to level decided', row.created_at, row.decided_at, null),
    make('pre-alert-to-arrival', 'Pre-alert to arrival', row.created_at, row.arrived_at, null),
    team,
  ];
}

/** Everything the timeline shows: each step with who and when, the criteria per revision, the intervals. */
export async function caseTimeline(db: Knex, me: Me, caseId: number, at: number): Promise<CaseTimeline> {
  const row = await caseForHospitalReader(db, me, caseId);
  const responseMinutes = await getSetting<number>(db, 'response.targetMinutes', row.hospital_id);
  const revisions: TimelineRevision[] = (await caseRevisions(db, caseId)).map((r) => ({
    revision: r.revision,
    createdAt: r.createdAt,
    createdBy: r.createdBy,
    etaMinutes: r.etaMinutes,
    notes: r.notes,
    fieldRisk: r.result.fieldRisk,
    activation: r.result.activation,
    criteria: r.result.criteria,
    missing: r.result.missing,
    policy: r.result.policy,
    vitals: (r.input.vitals ?? null) as Record<string, unknown> | null,
    handover: r.input.handover ?? null,
  }));
  const reviews = await caseReviews(db, caseId);
  return {
    case: await caseSummary(db, caseId),
    levelNames: namesOf(await levelsOfCase(db, row, at)),
    events: await caseEvents(db, caseId),
    revisions,
    intervals: intervalsOf(row, responseMinutes),
    reviews,
    review: reviews.length ? reviews[reviews.length - 1].status : 'unreviewed',
    canReview: may(me, 'review.write'),
    reviewBlocked: blockedReason(row.state),
  };
}

function reviewerActor(me: Me): Actor {
  return { id: me.user.id, role: roleFor(me, 'review.write') };
}

export type ReviewAction = 'sign-off' | 'flag';

/**
 * Signs a case off, or flags it for peer review with a comment; one review row and one audited
 * case event in one transaction. The latest review is read inside it, so of two reviewers
 * acting at once the first wins and the second is told what happened.
 */
export async function reviewCase(db: Knex, me: Me, caseId: number, action: ReviewAction, comment: string | undefined, at: number): Promise<ReviewView> {
  const actor = reviewerActor(me);
  const row = await caseForHospitalReader(db, me, caseId);
  const blocked = blockedReason(row.state);
  if (blocked) throw conflict(blocked);
  const reviewId = await db.transaction(async (trx) => {
    const latest: ReviewRecord | undefined = await reviewsQuery(trx).where('r.case_id', caseId).orderBy('r.id', 'desc').first();
    if (latest?.status === 'flagged') throw conflict(`Case ${row.case_number} is on the to-discuss list (flagged by ${latest.reviewer_name}); close the peer review with an outcome first.`);
    if (action === 'sign-off' && latest) {
      throw conflict(latest.status === 'signed-off'
        ? `Case ${row.case_number} was already signed off by ${latest.reviewer_name}.`
        : `Case ${row.case_number} was already reviewed at peer review (closed by ${latest.closed_by_name ?? 'unknown'}).`);
    }
    const status: ReviewStatus = action === 'sign-off' ? 'signed-off' : 'flagged';
    const [inserted] = await trx('reviews')
      .insert({ case_id: caseId, status, comment: comment?.trim() || null, reviewer_id: me.user.id, created_at: at })
      .returning('id');
    await recordCaseEvent(trx, {
      caseId,
      kind: action === 'sign-off' ? 'review-signed-off' : 'review-flagged',
      actor,
      at,
      before: { review: latest?.status ?? 'unreviewed' },
      data: { reviewId: inserted.id, status, comment: comment?.trim() || null },
      policy: { id: row.policy_id, version: row.policy_version },
    });
    return inserted.id as number;
  });
  const [review] = (await reviewsQuery(db).where('r.id', reviewId)) as ReviewRecord[];
  return toReview(review);
}

/** Takes a flagged case off the to-discuss list with the peer review's outcome. */
export async function closeDiscussion(db: Knex, me: Me, reviewId: number, outcome: string, at: number): Promise<ReviewView> {
  const actor = reviewerActor(me);
  const review = await db('reviews').where({ id: reviewId }).first();
  if (!review) throw notFound('That review');
  const row = await caseForHospitalReader(db, me, review.case_id);
  await db.transaction(async (trx) => {
    const changed = await trx('reviews').where({ id: reviewId, status: 'flagged' }).update({ status: 'discussed', outcome: outcome.trim(), closed_by: me.user.id, closed_at: at });
    if (!changed) throw conflict(`The peer review of case ${row.case_number} was already closed.`);
    await recordCaseEvent(trx, {
      caseId: review.case_id,
      kind: 'review-discussed',
      actor,
      at,
      before: { review: 'flagged', comment: review.comment },
      data: { reviewId, status: 'discussed', outcome: outcome.trim() },
      policy: { id: row.policy_id, version: row.policy_version },
    });
  });
  const [closed] = (await reviewsQuery(db).where('r.id', reviewId)) as ReviewRecord[];
  return toReview(closed);
}

/** The to-discuss list: flagged cases, oldest first, until each is closed with an outcome. */
export async function discussionList(db: Knex, me: Me, hospitalId?: number): Promise<DiscussionItem[]> {
  const hospitalIds = scopeHospitals(me, hospitalId);
  const rows = await reviewsQuery(db)
    .join('cases as c', 'c.id', 'r.case_id')
    .join('hospitals as h', 'h.id', 'c.hospital_id')
    .where('r.status', 'flagged')
    .whereIn('c.hospital_id', hospitalIds)
    .orderBy('r.created_at')
    .select('c.case_number', 'c.created_at as case_created_at', 'h.name as hospital_name', 'c.recommended_level', 'c.decided_level');
  return rows.map((r) => ({
    review: toReview(r),
    case: { id: r.case_id, caseNumber: r.case_number, createdAt: Number(r.case_created_at), hospital: r.hospital_name, recommendedLevel: r.recommended_level, decidedLevel: r.decided_level ?? null },
  }));
}
