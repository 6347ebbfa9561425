// Which action comes next on a case, and what each button says: the order a charge nurse works
// a trauma pre-alert in, so the next step is always the most prominent button on the card.
import type { BoardAction } from '@shared/schemas/board';
import type { CaseSummary } from '@shared/schemas/cases';
import { LEVEL_RANK } from '@shared/triage/policy';

const acknowledged = (c: CaseSummary) => c.acknowledgedAt != null && !c.levelRose;
const pageable = (c: CaseSummary) => c.decidedLevel != null && c.decidedLevel !== 'none';
const needsPage = (c: CaseSummary) => pageable(c) && (c.pagedAt == null || (c.decidedAt != null && c.decidedAt > c.pagedAt));
const teamLevel = (c: CaseSummary) => c.decidedLevel != null && LEVEL_RANK[c.decidedLevel] >= LEVEL_RANK.limited;

export function nextActionOf(c: CaseSummary): BoardAction {
  if (!acknowledged(c)) return 'acknowledge';
  if (!c.decidedLevel) return 'decide';
  if (needsPage(c) && c.bay == null && c.arrivedAt == null) return 'bay';
  if (needsPage(c)) return 'page';
  if (c.bay == null && c.arrivedAt == null) return 'bay';
  if (c.arrivedAt == null) return 'arrived';
  if (teamLevel(c) && c.teamAtBedsideAt == null) return 'team-at-bedside';
  return 'close';
}

/** Every action open on the case now, in the working order. */
export function availableActions(c: CaseSummary): BoardAction[] {
  const out: BoardAction[] = [];
  if (!acknowledged(c)) out.push('acknowledge');
  if (c.acknowledgedAt != null) {
    out.push('decide', 'bay');
    if (pageable(c)) out.push('page');
  }
  if (c.arrivedAt == null) out.push('arrived');
  else out.push('team-at-bedside');
  out.push('close');
  return out;
}

export function actionLabel(action: BoardAction, c: CaseSummary): string {
  switch (action) {
    case 'acknowledge':
      return c.levelRose ? 'Acknowledge the rise' : 'Acknowledge';
    case 'decide':
      return c.decidedLevel ? 'Change level' : 'Decide level';
    case 'bay':
      return c.bay ? 'Change bay' : 'Assign bay';
    case 'page':
      return c.pagedAt ? 'Page again' : 'Page team';
    case 'arrived':
      return 'Mark arrived';
    case 'team-at-bedside':
      return c.teamAtBedsideAt ? 'Correct bedside time' : 'Team leader at bedside';
    case 'close':
      return 'Close case';
  }
}
