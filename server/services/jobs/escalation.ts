import type { Knex } from 'knex';
import { announceCase, type Announcer } from '../../realtime/broadcast';
import type { Clock } from '../../deps';
import type { Mailer } from '../../mail';
import { recordCaseEvent, systemActor } from '../audit/audit';
import { levelsOfCase } from '../policies/policies';
import { caseSummary } from '../cases/summary';
import type { Job } from './job';
import { composeEscalation, composeEscalationDigest, hospitalClock, notificationList, type NotificationList } from '../board/paging';
import { getSetting } from '../people/settings';
import { byUrgency } from '../../../shared/board/urgency';
import type { CaseSummary } from '../../../shared/schemas/cases';
import type { BoardLevel } from '../../../shared/schemas/board';

// A pre-alert nobody acknowledges is the failure that hurts most, and a browser tab cannot be
// trusted to notice it (it may be closed, asleep, or the only one). So the server watches.

export interface EscalationDeps extends Announcer { db: Knex; clock: Clock; mailer: Mailer }

/** How often the server looks; well under the shortest sensible escalation time [ours]. */
export const ESCALATION_CHECK_MS = 15_000;

/**
 * From this many cases reaching the same step at one hospital in one look, the step's list gets
 * one digest instead of an e-mail per case [ours]: a flood must not bury the notice that matters.
 */
export const DIGEST_FROM = 3;

const SINCE = "COALESCE((SELECT MAX(e.at) FROM case_events e WHERE e.case_id = c.id AND e.kind = 'redirected'), c.created_at)";

export interface EscalationStep { afterMinutes: number; list: NotificationList }
interface LaterStep { times: number; list: NotificationList }

/**
 * A hospital's escalation steps: its escalation minutes N to the escalation list, then each later
 * step (a setting; by default 2N to the senior list), in time order.
 */
export async function escalationSteps(db: Knex, hospitalId: number, minutes: number): Promise<EscalationStep[]> {
  const later = await getSetting<LaterStep[]>(db, 'escalation.laterSteps', hospitalId);
  const steps: EscalationStep[] = [{ afterMinutes: minutes, list: 'escalation' }];
  for (const step of Array.isArray(later) ? later : []) {
    if (typeof step?.times === 'number' && step.times > 1) steps.push({ afterMinutes: Math.round(minutes * step.times), list: step.list });
  }
  return steps.sort((a, b) => a.afterMinutes - b.afterMinutes);
}

interface Reached { summary: CaseSummary; minutes: number; levels: BoardLevel[]; step: number; list: NotificationList; recipients: string[] }

/**
 * Escalates every en-route case without an acknowledgement step by step: at each of its
 * hospital's steps it is marked (overdue from the first), the step is audited on the case, the
 * board is told and the step's list is e-mailed, one digest per hospital and step when many are
 * due at once. The clock starts when the case reached this hospital (a redirect restarts it).
 * Returns the cases that reached a step.
 */
export async function runEscalation(deps: EscalationDeps): Promise<number[]> {
  const { db, clock, logger } = deps;
  const now = clock.now();
  const waiting = await db('cases as c')
    .join('hospitals as h', 'h.id', 'c.hospital_id')
    .where('c.state', 'en-route')
    .whereNull('c.acknowledged_at')
    .whereRaw(`${SINCE} + h.escalation_minutes * 60000 <= ?`, [now])
    .select('c.id', 'c.row_version', 'c.hospital_id', 'c.policy_id', 'c.policy_version', 'c.overdue_at', 'c.escalation_step', 'h.escalation_minutes', 'h.name as hospital_name')
    .select(db.raw(`${SINCE} AS since`));
  const stepsOf = new Map<number, EscalationStep[]>();
  const reached: Reached[] = [];
  for (const row of waiting) {
    let steps = stepsOf.get(row.hospital_id);
    if (!steps) stepsOf.set(row.hospital_id, (steps = await escalationSteps(db, row.hospital_id, Number(row.escalation_minutes))));
    const since = Number(row.since);
    const due = steps.filter((s) => since + s.afterMinutes * 60_000 <= now).length;
    const from = Number(row.escalation_step);
    if (due <= from) continue;
    const newSteps = steps.slice(from, due).map((s, i) => ({ ...s, step: from + i + 1 }));
    const recipients = await Promise.all(newSteps.map((s) => notificationList(db, row.hospital_id, s.list)));
    const won = await db.transaction(async (trx) => {
      const changed = await trx('cases')
        .where({ id: row.id, row_version: row.row_version })
        .update({ overdue_at: row.overdue_at ?? now, escalation_step: due, updated_at: now, row_version: row.row_version + 1 });
      if (!changed) return false;
      for (const [i, s] of newSteps.entries()) {
        await recordCaseEvent(trx, {
          caseId: row.id,
          kind: s.step === 1 ? 'overdue' : 'escalated',
          actor: systemActor,
          at: now,
          data: { step: s.step, minutes: s.afterMinutes, list: s.list, since, recipients: recipients[i] },
        });
      }
      return true;
    });
    // Acknowledged (or updated) in the meantime: the next look decides again.
    if (!won) continue;
    const summary = await caseSummary(db, row.id);
    announceCase(deps, summary, { kind: newSteps[0].step === 1 ? 'overdue' : 'escalated', at: now, by: null });
    const levels = await levelsOfCase(db, row, now);
    for (const [i, s] of newSteps.entries()) reached.push({ summary, minutes: s.afterMinutes, levels, step: s.step, list: s.list, recipients: recipients[i] });
  }
  await mailSteps(deps, reached, now);
  if (reached.length) logger.info({ cases: new Set(reached.map((r) => r.summary.id)).size }, 'escalation steps reached');
  return [...new Set(reached.map((r) => r.summary.id))];
}

/** Per hospital and step: one e-mail per case, or one digest when many reached it together. */
async function mailSteps(deps: EscalationDeps, reached: Reached[], now: number): Promise<void> {
  const { db, mailer, logger } = deps;
  const groups = new Map<string, Reached[]>();
  for (const r of reached) {
    const key = `${r.summary.hospital.id}:${r.step}`;
    groups.set(key, [...(groups.get(key) ?? []), r]);
  }
  for (const group of groups.values()) {
    const { summary, step, recipients, list } = group[0];
    const hospitalId = summary.hospital.id;
    if (!recipients.length) {
      logger.warn({ hospitalId, step, list, cases: group.length }, 'escalation step reached, but its list has no addresses');
      continue;
    }
    const clock = await hospitalClock(db, hospitalId);
    const mails = group.length >= DIGEST_FROM
      ? [{ mail: composeEscalationDigest(summary.hospital.name, byUrgency(group.map((r) => ({ ...r.summary, r })), now).map(({ r }) => r), step, now, clock), cases: group }]
      : group.map((r) => ({ mail: composeEscalation(r, step, now, clock), cases: [r] }));
    for (const { mail, cases } of mails) {
      try {
        await mailer.send({ ...mail, to: recipients, hospitalId });
      } catch (err) {
        logger.error({ err, hospitalId, step }, 'escalation e-mail could not be sent');
        await db.transaction(async (trx) => {
          for (const r of cases) {
            await recordCaseEvent(trx, { caseId: r.summary.id, kind: 'escalation-mail-failed', actor: systemActor, at: deps.clock.now(), data: { step, recipients, error: String((err as Error)?.message ?? err).slice(0, 300) } });
          }
        });
      }
    }
  }
}

/** The production timer; tests call runEscalation with a fake clock instead of waiting. */
export function escalationJob(deps: EscalationDeps, everyMs = ESCALATION_CHECK_MS): Job {
  let running: Promise<void> | null = null;
  let stopped = false;
  const tick = () => {
    if (running || stopped) return;
    running = runEscalation(deps)
      .then(() => {}, (err: unknown) => deps.logger.error({ err }, 'escalation check failed'))
      .finally(() => (running = null));
  };
  const timer = setInterval(tick, everyMs);
  timer.unref?.();
  const first = setTimeout(tick, 1000);
  first.unref?.();
  return {
    // Resolves when a round under way has ended, so its mail goes out before the mailer closes.
    stop: async () => {
      stopped = true;
      clearInterval(timer);
      clearTimeout(first);
      await running;
    },
  };
}
