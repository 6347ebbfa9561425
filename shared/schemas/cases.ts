import { z } from 'zod';
import { ClinicalInput } from './clinical';
import { safeText } from './text';
import type { Evaluation } from '../triage/evaluate';
import type { LevelId } from '../triage/policy';
import type { CaseEventData, CaseEventKind } from './case-events';

export const CASE_STATES = ['en-route', 'acknowledged', 'arrived', 'closed', 'cancelled'] as const;
export type CaseState = (typeof CASE_STATES)[number];
export const OPEN_STATES: readonly CaseState[] = ['en-route', 'acknowledged', 'arrived'];

/** One word for each state, the same on every screen and in every message. */
export const STATE_WORDS: Readonly<Record<CaseState, string>> = {
  'en-route': 'On the way',
  acknowledged: 'Acknowledged',
  arrived: 'Arrived',
  closed: 'Closed',
  cancelled: 'Cancelled',
};

const id = (what: string) => z.number({ error: `must be the ${what}'s number` }).int({ error: 'must be a whole number' }).positive({ error: 'must be positive' });
const eta = z.number({ error: 'must be a number of minutes' }).int({ error: 'must be whole minutes' }).min(0, { error: 'must be at least 0' }).max(600, { error: 'must be at most 600 minutes' });
const notes = safeText({ max: 2000, min: 0, lines: true });
const reason = safeText({ max: 500, min: 3, tooShort: 'needs a few words' });

/**
 * A new pre-alert from the ambulance; clientId is made in the browser so a retry is harmless.
 * Its `clinical` part is ClinicalInput, the one strict clinical contract (unknown keys refused with
 * the nearest known field, lists of unique catalogue ids): every way in — the socket, REST, the
 * command line and machine clients — parses with this schema or with ClinicalInput itself.
 */
export const PreAlert = z.object({
  clientId: z.uuid({ error: 'must be a UUID made by the sending device' }),
  hospitalId: id('destination hospital'),
  unitId: id('unit').nullable().optional(),
  etaMinutes: eta.nullable().optional(),
  notes: notes.optional(),
  clinical: ClinicalInput,
});
export type PreAlert = z.infer<typeof PreAlert>;

const MAX_CHANGES_CHARS = 16_000;
/**
 * An update's clinical part as the crew's screen sends it: only the changed fields, as a partial
 * report (merged and checked on the server, shared/schemas/clinical-changes.ts). Only its shape is
 * checked here; once merged, the strict ClinicalInput names any unknown or bad field.
 */
export const ClinicalChanges = z
  .record(z.string(), z.unknown(), { error: 'must be an object of the changed clinical fields' })
  .refine((value) => JSON.stringify(value).length <= MAX_CHANGES_CHARS, { error: `must be at most ${MAX_CHANGES_CHARS} characters as JSON` });
export type ClinicalChanges = z.infer<typeof ClinicalChanges>;

/**
 * New vitals, findings or ETA en route: a new revision, evaluated again. The crew's screen sends
 * `changes`, only what the crew changed, laid over the stored report on the server; a whole
 * report in `clinical` replaces it. One of the two; an ETA or notes left out stay as they were.
 */
export const PreAlertUpdate = z
  .object({
    caseId: id('case'),
    etaMinutes: eta.nullable().optional(),
    notes: notes.optional(),
    clinical: ClinicalInput.optional(),
    changes: ClinicalChanges.optional(),
  })
  .superRefine((update, ctx) => {
    if (update.clinical === undefined && update.changes === undefined) ctx.addIssue({ code: 'custom', path: ['changes'], message: 'is required: send the changed clinical fields (or a whole report in clinical)' });
    if (update.clinical !== undefined && update.changes !== undefined) ctx.addIssue({ code: 'custom', path: ['changes'], message: 'cannot come with a whole report in clinical; send one of the two' });
  });
export type PreAlertUpdate = z.infer<typeof PreAlertUpdate>;

export const CaseCancel = z.object({ caseId: id('case'), reason });
export type CaseCancel = z.infer<typeof CaseCancel>;

export const CaseRedirect = z.object({ caseId: id('case'), hospitalId: id('destination hospital'), reason });
export type CaseRedirect = z.infer<typeof CaseRedirect>;

export interface CaseRevisionView {
  revision: number;
  input: ClinicalInput;
  result: Evaluation;
  etaMinutes: number | null;
  notes: string | null;
  createdAt: number;
  createdBy: string;
}

/** What a board row and the paramedic's case card show; one shape for REST and socket. */
export interface CaseSummary {
  id: number;
  caseNumber: string;
  clientId: string;
  state: CaseState;
  hospital: { id: number; name: string; heightUnit: 'm' | 'ft' | 'storeys' };
  agency: { id: number; name: string };
  unit: { id: number; callSign: string } | null;
  createdAt: number;
  updatedAt: number;
  etaAt: number | null;
  revision: number;
  latest: CaseRevisionView;
  /** The first revision's vitals, for the trend since the first report. */
  firstVitals: ClinicalInput['vitals'];
  fieldRisk: Evaluation['fieldRisk'];
  recommendedLevel: LevelId;
  /** The recommendation rose at the latest update and nobody has acknowledged it since. */
  levelRose: boolean;
  decidedLevel: LevelId | null;
  decidedReason: string | null;
  decidedAt: number | null;
  decidedBy: string | null;
  acknowledgedAt: number | null;
  acknowledgedBy: string | null;
  bay: string | null;
  pagedAt: number | null;
  arrivedAt: number | null;
  teamAtBedsideAt: number | null;
  closedAt: number | null;
  cancelledAt: number | null;
  cancelReason: string | null;
  overdueAt: number | null;
  policy: { id: string; version: number; example: boolean };
  /** The record system that sent it, when a machine client did; null for a crew's screen. */
  source: string | null;
  /** Bumped on every change; an action sends the version it saw, so the first of two wins. */
  rowVersion: number;
}

interface CaseEventMeta {
  id: number;
  at: number;
  actor: string | null;
  actorRole: string | null;
}
/** A step on a case as the hospital reads it: who, when, and what its kind records. */
export type CaseEventView = CaseEventMeta & CaseEventData;
/** A step as its crew reads it: who and when, without what the hospital wrote. */
export type CrewCaseEventView = CaseEventMeta & { kind: CaseEventKind; data: null };
