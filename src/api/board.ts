// The Inbound board's calls: the snapshot it (re)loads, one case's truth after a refused
// action, and the charge nurse's actions. Live changes arrive over the socket.
import { apiGet, apiSend } from './http';
import type { BoardAction, BoardActionBody, BoardActionResult, BoardSnapshot } from '@shared/schemas/board';
import type { CaseSummary } from '@shared/schemas/cases';

export type { BoardAction, BoardSnapshot, CaseSummary };

/** The board's cases; given the cursor of the last snapshot, only what changed since (when the server can say). */
export function getBoard(hospitalId?: number, changesSince?: string) {
  const query = new URLSearchParams();
  if (hospitalId !== undefined) query.set('hospitalId', String(hospitalId));
  if (changesSince !== undefined) query.set('changesSince', changesSince);
  const search = query.toString();
  return apiGet<BoardSnapshot>(search ? `/api/board?${search}` : '/api/board');
}

export const getCaseSummary = async (id: number) => (await apiGet<{ case: CaseSummary }>(`/api/cases/${encodeURIComponent(id)}`)).case;

export const actOnCase = <A extends BoardAction>(caseId: number, action: A, body: BoardActionBody[A]) =>
  apiSend<BoardActionResult>('POST', `/api/cases/${encodeURIComponent(caseId)}/${action}`, body);
