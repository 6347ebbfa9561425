import type { CaseSummary } from '../../shared/schemas/cases';
import { roomOfAgency, roomOfHospital, type CaseChange } from '../../shared/realtime/events';
import type { RealtimeServer } from './index';

/** After a change commits: the destination's board and the sending agency's crews hear of it. */
export function announceCase(io: RealtimeServer, summary: CaseSummary, change: CaseChange | 'submitted'): void {
  const rooms = [roomOfHospital(summary.hospital.id), roomOfAgency(summary.agency.id)];
  if (change === 'submitted') io.to(rooms).emit('case:submitted', summary);
  else io.to(rooms).emit('case:updated', summary, change);
}

export function announceRemoved(io: RealtimeServer, hospitalId: number, summary: CaseSummary, reason: string): void {
  io.to(roomOfHospital(hospitalId)).emit('case:removed', { id: summary.id, caseNumber: summary.caseNumber, reason });
}
