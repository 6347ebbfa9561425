// The Inbound board's calls: the snapshot it (re)loads, one case's truth after a refused
// action, and the charge nurse's actions. Live changes arrive over the socket.
import { apiGet, apiSend } from './http';
import type { BoardAction, BoardActionBody, BoardActionResult, BoardSnapshot } from '../../shared/schemas/board';
import type { CaseSummary } from '../../shared/schemas/cases';

export type { BoardAction, BoardSnapshot, CaseSummary };

export const getBoard = (hospitalId?: number) => apiGet<BoardSnapshot>(hospitalId === undefined ? '/api/board' : `/api/board?hospitalId=${encodeURIComponent(hospitalId)}`);

export const getCaseSummary = async (id: number) => (await apiGet<{ case: CaseSummary }>(`/api/cases/${encodeURIComponent(id)}`)).case;

export const actOnCase = <A extends BoardAction>(caseId: number, action: A, body: BoardActionBody[A]) =>
  apiSend<BoardActionResult>('POST', `/api/cases/${encodeURIComponent(caseId)}/${action}`, body);
