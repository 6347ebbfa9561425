// The socket.io event maps both sides type against. Commands are imperative (`case:submit`),
// broadcasts are past tense (`case:submitted`). Every command answers through its acknowledgement.
import type { PagingStatus } from '../schemas/paging';
import type { CaseCancel, CaseRedirect, CaseSummary, PreAlert, PreAlertUpdate } from '../schemas/cases';

export type Ack<T> = (response: AckResponse<T>) => void;
export type AckResponse<T> =
  | { ok: true; data: T }
  /** retryAfterMs: with code rate_limited, when the same command will be taken again. */
  | { ok: false; error: { code: string; message: string; field?: string; issues?: { field: string; message: string }[]; retryAfterMs?: number } };

export interface SessionReady {
  userId: number;
  rooms: string[];
}

/** What happened to a case, for the announcement on a board or a crew's screen. */
export interface CaseChange {
  kind: string;
  at: number;
  by: string | null;
  /** The recommendation rose with this change: say so loudly. */
  rose?: boolean;
}

export interface ServerToClientEvents {
  'session:ready': (info: SessionReady) => void;
  'case:submitted': (summary: CaseSummary) => void;
  'case:updated': (summary: CaseSummary, change: CaseChange) => void;
  /** The case left this room's view (redirected to another ED). */
  'case:removed': (info: { id: number; caseNumber: string; reason: string }) => void;
  /** A paged case's replies or failed messages changed. */
  'paging:changed': (status: PagingStatus) => void;
}

export interface ClientToServerEvents {
  'session:rooms': (ack: Ack<{ rooms: string[] }>) => void;
  'case:submit': (payload: PreAlert, ack: Ack<{ caseId: number; caseNumber: string; created: boolean; summary: CaseSummary }>) => void;
  'case:update': (payload: PreAlertUpdate, ack: Ack<{ summary: CaseSummary; rose: boolean }>) => void;
  'case:cancel': (payload: CaseCancel, ack: Ack<{ summary: CaseSummary }>) => void;
  'case:redirect': (payload: CaseRedirect, ack: Ack<{ summary: CaseSummary }>) => void;
}

export const roomOfHospital = (id: number) => `hospital:${id}`;
export const roomOfAgency = (id: number) => `agency:${id}`;
export const roomOfUser = (id: number) => `user:${id}`;
