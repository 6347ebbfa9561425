import { CaseCancel, CaseRedirect, PreAlert, PreAlertUpdate, type CaseSummary } from '../../shared/schemas/cases';
import type { Me } from '../../shared/roles';
import { crewView, readsAsCrew } from '../services/cases/crew';
import type { AppDeps } from '../deps';
import { assertMay, roleFor } from '../auth/guards';
import { cancelCase, redirectCase, reviseCase, submitPreAlert } from '../services/cases/commands';
import { caseSummary } from '../services/cases/summary';
import type { SocketFeature } from '.';
import { announceCase, announceRemoved } from './broadcast';
import { onCommand } from './command';
import { crewCommandLimiter, DEFAULT_CREW_COMMAND_LIMITS, memoryLimiterStore } from '../limits';

/** The ambulance's commands: every one checks the role, validates with the shared schema, and acknowledges. */
export function caseCommands(deps: AppDeps): SocketFeature {
  const { db, clock, logger } = deps;
  // One count for every connection: a crew's second device shares its account's and unit's limit.
  const limits = crewCommandLimiter(deps.limiterStore ?? memoryLimiterStore, deps.config.crewCommandLimits ?? DEFAULT_CREW_COMMAND_LIMITS);
  const allow = (me: Me) => assertMay(me, 'pre-alerts.send');
  return (_io, socket) => {
    const actor = () => ({ me: socket.data.me, role: roleFor(socket.data.me, 'pre-alerts.send') });
    const asCrew = (summary: CaseSummary) => (readsAsCrew(socket.data.me, summary) ? crewView(summary) : summary);

    onCommand(socket, logger, 'case:submit', {
      allow,
      schema: PreAlert,
      async run(payload) {
        await limits.consume(socket.data.me.user.id, payload.unitId);
        const { caseId, created } = await submitPreAlert(db, clock, actor(), payload);
        const summary = await caseSummary(db, caseId);
        // Committed before the acknowledgement; announced after it, once.
        if (created) queueMicrotask(() => announceCase(deps, summary, 'submitted'));
        return { caseId, caseNumber: summary.caseNumber, created, summary: asCrew(summary) };
      },
    });

    onCommand(socket, logger, 'case:update', {
      allow,
      schema: PreAlertUpdate,
      async run(payload) {
        const unit = await db('cases').where({ id: payload.caseId }).first('unit_id');
        await limits.consume(socket.data.me.user.id, unit?.unit_id);
        const { caseId, rose } = await reviseCase(db, clock, actor(), payload);
        const summary = await caseSummary(db, caseId);
        queueMicrotask(() => announceCase(deps, summary, { kind: 'revised', at: summary.updatedAt, by: socket.data.me.user.name, rose }));
        return { summary: asCrew(summary), rose };
      },
    });

    onCommand(socket, logger, 'case:cancel', {
      allow,
      schema: CaseCancel,
      async run(payload) {
        const { caseId } = await cancelCase(db, clock, actor(), payload);
        const summary = await caseSummary(db, caseId);
        queueMicrotask(() => announceCase(deps, summary, { kind: 'cancelled', at: summary.updatedAt, by: socket.data.me.user.name }));
        return { summary: asCrew(summary) };
      },
    });

    onCommand(socket, logger, 'case:redirect', {
      allow,
      schema: CaseRedirect,
      async run(payload) {
        const { caseId, fromHospitalId } = await redirectCase(db, clock, actor(), payload);
        const summary = await caseSummary(db, caseId);
        queueMicrotask(() => {
          announceRemoved(deps, fromHospitalId, summary, `Redirected to ${summary.hospital.name}: ${payload.reason}`);
          announceCase(deps, summary, 'submitted');
        });
        return { summary: asCrew(summary) };
      },
    });
  };
}
