import { z } from 'zod';
import { safeText } from './text';
import { LEVEL_IDS, type LevelId } from '../triage/policy';
import type { CaseSummary } from './cases';
import type { CaseEventKind } from './case-events';
import { surfaceOptions, treatmentOptions, type ClinicalInput } from './clinical';
import type { CriteriaSetId } from '../triage/criteria';
import { fallHeightThresholdM } from '../triage/fall-threshold';
import { formatHeight, formatThreshold } from '../board/height-display';

// The charge nurse's actions on a case. Each body carries the rowVersion the nurse's board
// showed, so of two nurses acting on the same case at once the first wins and the second is told.

const rowVersion = z
  .number({ error: 'must be the version of the case your board shows' })
  .int({ error: 'must be a whole number' })
  .positive({ error: 'must be positive' });

/** A time the nurse records after the fact ("arrived 03:12"); absent means now. */
const pastTime = z.number({ error: 'must be a time (milliseconds since 1970)' }).int({ error: 'must be whole milliseconds' }).positive({ error: 'must be a time' });

const reason = safeText({ max: 500, min: 0 });

export const BoardAcknowledge = z.object({ rowVersion });
export type BoardAcknowledge = z.infer<typeof BoardAcknowledge>;

export const BoardDecide = z.object({
  rowVersion,
  level: z.enum(LEVEL_IDS, { error: `must be one of: ${LEVEL_IDS.join(', ')}` }),
  /** Required (a few words) when the level is below the recommendation; see REASON_MIN. */
  reason: reason.optional(),
});
export type BoardDecide = z.infer<typeof BoardDecide>;

/** A reason shorter than this says nothing a reviewer can use [ours]. */
export const REASON_MIN = 3;

export const BoardBay = z.object({
  rowVersion,
  bay: safeText({ max: 40, tooShort: 'must name the bay' }),
  /** The nurse saw that another open case has this bay and assigns it anyway. */
  confirmOccupied: z.boolean({ error: 'must be true or false' }).optional(),
});
export type BoardBay = z.infer<typeof BoardBay>;

export const BoardPage = z.object({ rowVersion });
export type BoardPage = z.infer<typeof BoardPage>;

export const BoardArrived = z.object({ rowVersion, at: pastTime.optional() });
export type BoardArrived = z.infer<typeof BoardArrived>;

export const BoardTeamAtBedside = z.object({ rowVersion, at: pastTime.optional() });
export type BoardTeamAtBedside = z.infer<typeof BoardTeamAtBedside>;

/** Closing a case whose patient never arrived needs a reason (say, "went to another ED"). */
export const BoardClose = z.object({ rowVersion, reason: reason.optional() });
export type BoardClose = z.infer<typeof BoardClose>;

export const BOARD_ACTIONS = ['acknowledge', 'decide', 'bay', 'page', 'arrived', 'team-at-bedside', 'close'] as const;
export type BoardAction = (typeof BOARD_ACTIONS)[number];

export const BOARD_ACTION_SCHEMAS = {
  acknowledge: BoardAcknowledge,
  decide: BoardDecide,
  bay: BoardBay,
  page: BoardPage,
  arrived: BoardArrived,
  'team-at-bedside': BoardTeamAtBedside,
  close: BoardClose,
} as const satisfies Record<BoardAction, z.ZodType>;

export type BoardActionBody = {
  acknowledge: BoardAcknowledge;
  decide: BoardDecide;
  bay: BoardBay;
  page: BoardPage;
  arrived: BoardArrived;
  'team-at-bedside': BoardTeamAtBedside;
  close: BoardClose;
};

/** What a screen gives for an action: its body less the row version, which the board store adds. */
export type BoardActionFields<A extends BoardAction> = Omit<BoardActionBody[A], 'rowVersion'>;

/** The case_events kind each action records, and the change kind its broadcast carries. */
export const ACTION_EVENT = {
  acknowledge: 'acknowledged',
  decide: 'level-decided',
  bay: 'bay-assigned',
  page: 'paged',
  arrived: 'arrived',
  'team-at-bedside': 'team-at-bedside',
  close: 'closed',
} as const satisfies Record<BoardAction, CaseEventKind>;

/** How far a recorded time may lie ahead of the server's clock (devices drift) [ours]. */
export const FUTURE_TOLERANCE_MS = 2 * 60_000;

export interface BoardLevel { id: LevelId; name: string }

/** What the board loads first, and again after every reconnect: the truth, then live events. */
export interface BoardSnapshot {
  /** responseTargetMinutes: the hospital's own bedside target for the highest level (SOURCES.md §5). */
  hospital: { id: number; name: string; heightUnit: 'm' | 'ft' | 'storeys'; escalationMinutes: number; responseTargetMinutes: number };
  /** The level names of the policy in force now, for the decide control. */
  levels: BoardLevel[];
  cases: CaseSummary[];
  /** The server's clock, so countdowns on a wall screen with a wrong clock still read true. */
  at: number;
  /** Where this snapshot stands in the record of changes; the next reload may ask for what changed since. */
  cursor: string;
  /**
   * Present when the board asked for the changes since a cursor and got them: `cases` then holds
   * only the open cases changed since, and `openIds` every case open now, so the board drops the rest.
   */
  changesSince?: string;
  openIds?: number[];
  /**
   * How many cases are open at this hospital in all. A whole list holds at most the server's cap
   * (the most urgent first); when this is larger the board says how many it does not show.
   */
  openTotal?: number;
}

/** A change cursor as the server writes it: the audit row's id, and the start of its hash. */
export const BOARD_CURSOR = /^(\d{1,15})-([0-9a-f]{16})$/;

/** A successful action: the case as it now stands. */
export interface BoardActionResult { case: CaseSummary }

// ---- Plain display helpers both the board and the page e-mail use (no I/O).

/**
 * A fall height in the hospital's preferred unit, always to one decimal: "13.1 ft", "4.3 m",
 * "1.4 storeys"; 0 is from standing. A whole figure keeps its ".0" ("20.0 ft"), so a patient's
 * rounded height never reads like a criterion's exact "20 ft".
 */
export function formatFallHeight(heightM: number, unit: 'm' | 'ft' | 'storeys'): string {
  return formatHeight(heightM, unit);
}

const SEX_SHORT: Record<string, string> = { female: 'female', male: 'male', other: 'other sex', unknown: 'sex not known' };

/** "72-year-old female"; infants in months, as the crew would say it. */
export function formatAgeSex(ageYears: number, sex: string | null | undefined): string {
  const age = ageYears < 1 ? `${Math.round(ageYears * 12)}-month-old` : `${Math.floor(ageYears)}-year-old`;
  return `${age} ${SEX_SHORT[sex ?? 'unknown'] ?? 'sex not known'}`;
}

/** The level name a case's policy gives, falling back to the id when the list lacks it. */
export function levelName(levels: readonly BoardLevel[], id: LevelId | null | undefined): string {
  if (!id) return 'not decided';
  return levels.find((l) => l.id === id)?.name ?? id;
}

/** One line of the handover as the card, the page and the printed sheet show it. */
export interface HandoverLine { label: string; text: string }

/**
 * The crew's handover beyond the criteria, in the order a pre-alert is spoken; only what the
 * crew gave. `clock` shows a time the way the reader's screen or e-mail shows times.
 */
export function handoverLines(input: Pick<ClinicalInput, 'handover'>, clock: (at: number) => string): HandoverLine[] {
  const h = input.handover;
  const lines: HandoverLine[] = [];
  if (h?.injuredAt != null) lines.push({ label: 'Time of injury', text: clock(h.injuredAt) });
  if (h?.anticoagulantName || h?.anticoagulantLastDoseAt != null) {
    const dose = h.anticoagulantLastDoseAt != null ? `last dose ${clock(h.anticoagulantLastDoseAt)}` : 'last dose not known';
    lines.push({ label: 'Anticoagulant', text: `${h.anticoagulantName || 'name not given'}, ${dose}` });
  }
  if (h?.treatments?.length) lines.push({ label: 'Treatment given', text: h.treatments.map((t) => treatmentOptions.find((o) => o.id === t)?.label ?? t).join(', ') });
  if (h?.allergies) lines.push({ label: 'Allergies', text: h.allergies });
  return lines;
}

/**
 * The fall height in the hospital's unit to one decimal, with the crew's own figure beside it
 * when they gave another unit: "10.0 ft (entered as 3.05 m)".
 */
export function formatFallHeightAsEntered(fall: ClinicalInput['fall'], unit: 'm' | 'ft' | 'storeys'): string {
  const shown = formatFallHeight(fall.heightM, unit);
  const entered = fall.entered;
  if (!entered || entered.unit === unit || fall.heightM === 0) return shown;
  const word = entered.unit === 'storeys' ? (entered.value === 1 ? 'storey' : 'storeys') : entered.unit;
  return `${shown} (entered as ${entered.value} ${word})`;
}

/**
 * The fall criterion's figure the height is compared with, exact, in the hospital's unit first
 * with the other common unit beside it: "criterion: above 6.096 m (20 ft)". Only shown, never
 * written back; empty when the set has no fixed figure for the patient's age.
 */
export function fallCriterionPhrase(set: CriteriaSetId, ageYears: number, unit: 'm' | 'ft' | 'storeys'): string {
  const threshold = fallHeightThresholdM(set, ageYears);
  if (threshold === null) return '';
  return `criterion: above ${formatThreshold(threshold, unit)}`;
}

/** The fall as the crew gave it: "10.0 ft (entered as 3.05 m) onto concrete". */
export function formatFall(input: Pick<ClinicalInput, 'fall'>, unit: 'm' | 'ft' | 'storeys', unknownLanding = ''): string {
  return [formatFallHeightAsEntered(input.fall, unit), landingPhrase(input.fall.surface) || unknownLanding].filter(Boolean).join(' ');
}

/**
 * The fall as the card, page and print show it, the criterion last:
 * "10.0 ft (entered as 3.05 m) onto concrete; criterion: above 10 ft (3.048 m)".
 */
export function formatFallWithCriterion(input: Pick<ClinicalInput, 'fall' | 'ageYears'>, set: CriteriaSetId, unit: 'm' | 'ft' | 'storeys', unknownLanding = ''): string {
  const criterion = input.fall.heightM === 0 ? '' : fallCriterionPhrase(set, input.ageYears, unit);
  return [formatFall(input, unit, unknownLanding), criterion].filter(Boolean).join('; ');
}

/** Where the patient landed, as a phrase after the height: "onto concrete", "down stairs"; empty when not known. */
export function landingPhrase(surface: string | null | undefined): string {
  if (!surface || surface === 'unknown') return '';
  if (surface === 'stairs') return 'down stairs';
  if (surface === 'vehicle') return 'onto a vehicle';
  if (surface === 'other') return 'onto something else';
  const label = surfaceOptions.find((o) => o.id === surface)?.label ?? surface;
  return `onto ${label.toLowerCase()}`;
}
