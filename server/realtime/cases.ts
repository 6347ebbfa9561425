import type { z } from 'zod';
import { CaseCancel, CaseRedirect, PreAlert, PreAlertUpdate } from '../../shared/schemas/cases';
import type { Ack } from '../../shared/realtime/events';
import type { CaseSummary } from '../../shared/schemas/cases';
import { crewView, readsAsCrew } from '../services/cases/crew';
import type { AppDeps } from '../deps';
import { parseOr400 } from '../errors';
import { assertMay, roleFor } from '../auth/guards';
import { cancelCase, caseSummary, redirectCase, reviseCase, submitPreAlert } from '../services/cases/cases';
import { ackError, type SocketFeature } from '.';
import { announceCase, announceRemoved } from './broadcast';
import { crewCommandLimiter, DEFAULT_CREW_COMMAND_LIMITS, memoryLimiterStore } from '../limits';

/** The ambulance's commands: every one checks the role, validates with the shared schema, and acknowledges. */
export function caseCommands(deps: AppDeps): SocketFeature {
  const { db, clock, logger } = deps;
  // One count for every connection: a crew's second device shares its account's and unit's limit.
  const limits = crewCommandLimiter(deps.limiterStore ?? memoryLimiterStore, deps.config.crewCommandLimits ?? DEFAULT_CREW_COMMAND_LIMITS);
  return (_io, socket) => {
    function command<S extends z.ZodType, T>(event: string, schema: S, run: (payload: z.infer<S>) => Promise<T>) {
      socket.on(event as never, (async (raw: unknown, ack: Ack<T>) => {
        if (typeof ack !== 'function') return;
        try {
          assertMay(socket.data.me, 'pre-alerts.send');
          ack({ ok: true, data: await run(parseOr400(schema, raw)) });
        } catch (err) {
          ack(ackError(err, logger));
        }
      }) as never);
    }
    const actor = () => ({ me: socket.data.me, role: roleFor(socket.data.me, 'pre-alerts.send') });
    const asCrew = (summary: CaseSummary) => (readsAsCrew(socket.data.me, summary) ? crewView(summary) : summary);

    command('case:submit', PreAlert, async (payload) => {
      await limits.consume(socket.data.me.user.id, payload.unitId);
      const { caseId, created } = await submitPreAlert(db, clock, actor(), payload);
      const summary = await caseSummary(db, caseId);
      // Committed before the acknowledgement; announced after it, once.
      if (created) queueMicrotask(() => announceCase(deps, summary, 'submitted'));
      return { caseId, caseNumber: summary.caseNumber, created, summary: asCrew(summary) };
    });

    command('case:update', PreAlertUpdate, async (payload) => {
      const unit = await db('cases').where({ id: payload.caseId }).first('unit_id');
      await limits.consume(socket.data.me.user.id, unit?.unit_id);
      const { caseId, rose } = await reviseCase(db, clock, actor(), payload);
      const summary = await caseSummary(db, caseId);
      queueMicrotask(() => announceCase(deps, summary, { kind: 'revised', at: summary.updatedAt, by: socket.data.me.user.name, rose }));
      return { summary: asCrew(summary), rose };
    });

    command('case:cancel', CaseCancel, async (payload) => {
      const { caseId } = await cancelCase(db, clock, actor(), payload);
      const summary = await caseSummary(db, caseId);
      queueMicrotask(() => announceCase(deps, summary, { kind: 'cancelled', at: summary.updatedAt, by: socket.data.me.user.name }));
      return { summary: asCrew(summary) };
    });

    command('case:redirect', CaseRedirect, async (payload) => {
      const { caseId, fromHospitalId } = await redirectCase(db, clock, actor(), payload);
      const summary = await caseSummary(db, caseId);
      queueMicrotask(() => {
        announceRemoved(deps, fromHospitalId, summary, `Redirected to ${summary.hospital.name}: ${payload.reason}`);
        announceCase(deps, summary, 'submitted');
      });
      return { summary: asCrew(summary) };
    });
  };
}
