import type { Logger } from 'pino';
import type { CaseSummary } from '../../shared/schemas/cases';
import { roomOfAgency, roomOfHospital, type CaseChange } from '../../shared/realtime/events';
import type { CatchUpLane } from './catch-up';
import { crewView } from '../services/cases/crew';
import type { RealtimeServer } from '.';

/** What an announcement needs: the socket server, the lane the crews' copies wait in, and where a failed copy is logged. */
export interface Announcer { io: RealtimeServer; catchUp: CatchUpLane; logger: Logger }

/**
 * After a change commits: the destination's boards hear of it at once; the sending agency's
 * crews a moment later, in the catch-up lane. A pre-alert's broadcast goes to every crew screen
 * of its agency (hundreds in a region) and to a handful of boards: written in one go, the next
 * pre-alert waited behind all of it. The boards' copy is the one an ED acts on; a crew's screen
 * only follows. The sending crew learns of its own pre-alert from the acknowledgement. Both
 * copies carry the row version, so a screen that hears of a case twice keeps the later one;
 * the crews' copies leave in the order the changes were made.
 */
export function announceCase({ io, catchUp, logger }: Announcer, summary: CaseSummary, change: CaseChange | 'submitted'): void {
  const boards = roomOfHospital(summary.hospital.id);
  const send = (to: ReturnType<RealtimeServer['to']>, copy: CaseSummary) => (change === 'submitted' ? to.emit('case:submitted', copy) : to.emit('case:updated', copy, change));
  send(io.to(boards), summary);
  // A person in both rooms (a nurse who is also a crew member) has had the boards' copy. The
  // crews' copy leaves out what only the hospital reads.
  const crews = crewView(summary);
  catchUp.run(() => send(io.to(roomOfAgency(summary.agency.id)).except(boards), crews)).catch((err: unknown) => logger.error({ err, caseId: summary.id }, "the crews' copy of a change could not be sent"));
}

export function announceRemoved({ io }: Announcer, hospitalId: number, summary: CaseSummary, reason: string): void {
  io.to(roomOfHospital(hospitalId)).emit('case:removed', { id: summary.id, caseNumber: summary.caseNumber, reason });
}
