// The socket.io event maps both sides type against. Commands are imperative (`case:submit`),
// broadcasts are past tense (`case:submitted`). Every command answers through its acknowledgement.
import type { PagingStatus } from '../schemas/paging';
import type { CaseCancel, CaseRedirect, CaseSummary, PreAlert, PreAlertUpdate } from '../schemas/cases';

export type Ack<T> = (response: AckResponse<T>) => void;
export type AckResponse<T> =
  | { ok: true; data: T }
  /**
   * retryAfterMs: with code rate_limited, when the same command will be taken again. case: with a
   * refusal because the case changed first or has ended, the case as it now stands.
   */
  | { ok: false; error: { code: string; message: string; field?: string; issues?: { field: string; message: string }[]; retryAfterMs?: number; case?: CaseSummary } };

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

/** What a pre-alert's acknowledgement carries: the case it made, or the one its clientId already made. */
export interface SubmitAnswer {
  caseId: number;
  caseNumber: string;
  created: boolean;
  summary: CaseSummary;
}

/**
 * Every command with its payload and the data its acknowledgement carries. The socket events, the
 * server's handlers (server/realtime/command.ts) and the client's senders (src/api/socket.ts) are
 * all typed from this one table.
 */
export interface Commands {
  'case:submit': { payload: PreAlert; answer: SubmitAnswer };
  'case:update': { payload: PreAlertUpdate; answer: { summary: CaseSummary; rose: boolean } };
  'case:cancel': { payload: CaseCancel; answer: { summary: CaseSummary } };
  'case:redirect': { payload: CaseRedirect; answer: { summary: CaseSummary } };
}
export type CommandName = keyof Commands;
export type CommandPayload<E extends CommandName> = Commands[E]['payload'];
export type CommandAnswer<E extends CommandName> = Commands[E]['answer'];
/** The listener socket.io calls with a command's payload and its acknowledgement. */
export type CommandListener<E extends CommandName> = (payload: CommandPayload<E>, ack: Ack<CommandAnswer<E>>) => void;
type CommandEvents = { [E in CommandName]: CommandListener<E> };

export interface ClientToServerEvents extends CommandEvents {
  /** The rooms this connection is in: a question without a payload, answered by the connection itself. */
  'session:rooms': (ack: Ack<{ rooms: string[] }>) => void;
}

export const roomOfHospital = (id: number) => `hospital:${id}`;
export const roomOfAgency = (id: number) => `agency:${id}`;
export const roomOfUser = (id: number) => `user:${id}`;
