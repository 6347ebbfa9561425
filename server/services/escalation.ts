import type { Knex } from 'knex';
import { announceCase, type Announcer } from '../realtime/broadcast';
import type { Clock } from '../deps';
import type { Mailer } from '../mail';
import { recordCaseEvent, systemActor } from './audit';
import { levelsOfCase } from './board';
import { caseSummary } from './cases';
import type { Job } from './jobs';
import { composeEscalation, notificationList } from './paging';

// A pre-alert nobody acknowledges is the failure that hurts most, and a browser tab cannot be
// trusted to notice it (it may be closed, asleep, or the only one). So the server watches.

export interface EscalationDeps extends Announcer { db: Knex; clock: Clock; mailer: Mailer }

/** How often the server looks; well under the shortest sensible escalation time [ours]. */
export const ESCALATION_CHECK_MS = 15_000;

const SINCE = "COALESCE((SELECT MAX(e.at) FROM case_events e WHERE e.case_id = c.id AND e.kind = 'redirected'), c.created_at)";

/**
 * Marks overdue every en-route case at its hospital's escalation time without an
 * acknowledgement, mails the hospital's escalation list and tells the board. The clock starts
 * when the case reached this hospital (a redirect restarts it). Returns the cases marked.
 */
export async function runEscalation(deps: EscalationDeps): Promise<number[]> {
  const { db, clock, mailer, logger } = deps;
  const now = clock.now();
  const due = await db('cases as c')
    .join('hospitals as h', 'h.id', 'c.hospital_id')
    .where('c.state', 'en-route')
    .whereNull('c.acknowledged_at')
    .whereNull('c.overdue_at')
    .select('c.id', 'c.row_version', 'c.hospital_id', 'c.policy_id', 'c.policy_version', 'h.escalation_minutes')
    .select(db.raw(`${SINCE} AS since`))
    .whereRaw(`${SINCE} + h.escalation_minutes * 60000 <= ?`, [now]);
  const marked: number[] = [];
  for (const row of due) {
    const minutes = Number(row.escalation_minutes);
    const recipients = await notificationList(db, row.hospital_id, 'escalation');
    const won = await db.transaction(async (trx) => {
      const changed = await trx('cases').where({ id: row.id, row_version: row.row_version }).update({ overdue_at: now, updated_at: now, row_version: row.row_version + 1 });
      if (!changed) return false;
      await recordCaseEvent(trx, { caseId: row.id, kind: 'overdue', actor: systemActor, at: now, data: { minutes, since: Number(row.since), recipients } });
      return true;
    });
    // Acknowledged (or updated) in the meantime: the next look decides again.
    if (!won) continue;
    marked.push(row.id);
    const summary = await caseSummary(db, row.id);
    announceCase(deps, summary, { kind: 'overdue', at: now, by: null });
    if (!recipients.length) {
      logger.warn({ caseId: row.id, hospitalId: row.hospital_id }, 'overdue case, but the hospital has no escalation list');
      continue;
    }
    try {
      await mailer.send({ ...composeEscalation(summary, minutes, await levelsOfCase(db, row), now), to: recipients, hospitalId: row.hospital_id });
    } catch (err) {
      logger.error({ err, caseId: row.id }, 'escalation e-mail could not be sent');
      await db.transaction((trx) => recordCaseEvent(trx, { caseId: row.id, kind: 'escalation-mail-failed', actor: systemActor, at: clock.now(), data: { recipients, error: String((err as Error)?.message ?? err).slice(0, 300) } }));
    }
  }
  return marked;
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
