// The Inbound board's calls: the snapshot it (re)loads, one case's truth (carried by a refused
// action's answer, or read again), and the charge nurse's actions. Live changes arrive over the socket.
import { ApiError, apiGet, apiSend } from './http';
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

const isSummaryOf = (value: unknown, caseId: number): value is CaseSummary =>
  typeof value === 'object' && value !== null && 'id' in value && value.id === caseId && 'rowVersion' in value && typeof value.rowVersion === 'number';

/** The case as it now stands, when a refused action's answer carries it (another change came first, a failed page); else null. */
export function refusedCase(error: unknown, caseId: number): CaseSummary | null {
  if (!(error instanceof ApiError) || typeof error.body !== 'object' || error.body === null || !('case' in error.body)) return null;
  return isSummaryOf(error.body.case, caseId) ? error.body.case : null;
}
