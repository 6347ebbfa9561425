import type { Knex } from 'knex';
import { LEVEL_RANK, type LevelId } from '../../../shared/triage/policy';
import type { Clock } from '../../deps';
import { recordCaseEvent } from '../audit/audit';
import type { DemoIds } from './ids';

const DAY = 86_400_000;

const SIGN_OFF_NOTES = [
  'Criteria and decision agree; times within target.',
  null,
  'Appropriate level. Good pre-alert detail from the crew.',
  null,
];
const FLAG_NOTES = [
  'Decided below the recommendation; reason given is thin. Discuss at the next peer review.',
  'Team leader at the bedside late for a full activation; check the paging record.',
];

/**
 * Demo reviews: the trauma lead has signed off some of the older closed cases and flagged two
 * for peer review, and left the newest for the person trying the screen. With no past cases
 * (or none closed yet) it adds nothing.
 */
export async function seedDemoReviews(db: Knex, ids: DemoIds, clock: Clock): Promise<void> {
  const lead = ids.users['lead@plumbline.test'];
  if (!lead) return;
  const now = clock.now();
  const cases = await db('cases')
    .where({ hospital_id: ids.hospitals.general, state: 'closed' })
    .where('created_at', '<', now - 7 * DAY)
    .orderBy('created_at')
    .select('id', 'created_at', 'closed_at', 'recommended_level', 'decided_level', 'policy_id', 'policy_version');
  if (!cases.length) return;
  const below = (c: (typeof cases)[number]) => c.decided_level != null && LEVEL_RANK[c.decided_level as LevelId] < LEVEL_RANK[c.recommended_level as LevelId];
  const flagged = [...cases.filter(below), ...cases.filter((c) => !below(c))].slice(0, Math.min(2, cases.length));
  // The other older cases: every second one signed off, so the screen still has work on it.
  const signed = cases.filter((c) => !flagged.includes(c)).filter((_, i) => i % 2 === 0);
  const reviewAt = (c: (typeof cases)[number]) => Math.min(now - DAY, Number(c.closed_at ?? c.created_at) + 2 * DAY);

  const write = async (c: (typeof cases)[number], status: 'signed-off' | 'flagged', comment: string | null) => {
    const at = reviewAt(c);
    const [review] = await db('reviews').insert({ case_id: c.id, status, comment, reviewer_id: lead, created_at: at }).returning('id');
    await recordCaseEvent(db, {
      caseId: c.id,
      kind: status === 'signed-off' ? 'review-signed-off' : 'review-flagged',
      actor: { id: lead, role: 'trauma_lead' },
      at,
      before: { review: 'unreviewed' },
      data: { reviewId: review.id, status, comment },
      policy: { id: c.policy_id, version: c.policy_version },
    });
  };
  for (const [i, c] of flagged.entries()) await write(c, 'flagged', FLAG_NOTES[i]);
  for (const [i, c] of signed.entries()) await write(c, 'signed-off', SIGN_OFF_NOTES[i % SIGN_OFF_NOTES.length]);
}
