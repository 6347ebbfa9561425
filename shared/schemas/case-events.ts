// The kinds of step a case records (case_events.kind), each with its words: the title a timeline
// shows, the phrase a sentence uses ("… by Morgan at 03:12"), and whether the crew follows it.
// One home: the server's messages, the crew's timeline and the review screens read these.

interface EventWords {
  title: string;
  phrase: string;
  /** Shown on the crew's timeline (without its data); pages, escalations and reviews are the hospital's. */
  crew?: true;
}

export const EVENT_WORDS = {
  received: { title: 'Pre-alert received', phrase: 'received', crew: true },
  revised: { title: 'Update from the crew', phrase: 'updated by the crew', crew: true },
  cancelled: { title: 'Cancelled by the crew', phrase: 'cancelled by the crew', crew: true },
  redirected: { title: 'Redirected to another ED', phrase: 'redirected by the crew', crew: true },
  acknowledged: { title: 'Acknowledged', phrase: 'acknowledged', crew: true },
  'level-decided': { title: 'Level decided', phrase: 'level decided', crew: true },
  'bay-assigned': { title: 'Bay assigned', phrase: 'bay assigned', crew: true },
  paged: { title: 'Team paged', phrase: 'team paged' },
  'page-failed': { title: 'Page failed', phrase: 'page failed' },
  'page-sms-sent': { title: 'Team paged by SMS', phrase: 'team paged by SMS' },
  'page-repeated': { title: 'Page repeated: nobody on the way yet', phrase: 'page repeated' },
  'page-escalated': { title: 'Page escalated to the next tier', phrase: 'page escalated to the next tier' },
  'page-receipt': { title: 'SMS delivery report', phrase: 'SMS delivery reported' },
  'page-reply': { title: 'Reply to the page', phrase: 'page answered' },
  'page-mail-failed': { title: 'Page e-mail failed', phrase: 'page e-mail failed' },
  arrived: { title: 'Patient arrived', phrase: 'marked arrived', crew: true },
  'team-at-bedside': { title: 'Team leader at the bedside', phrase: 'team leader at the bedside recorded', crew: true },
  closed: { title: 'Closed', phrase: 'closed', crew: true },
  overdue: { title: 'Escalated: not acknowledged in time', phrase: 'marked overdue' },
  escalated: { title: 'Escalated', phrase: 'escalated' },
  'review-signed-off': { title: 'Review: signed off', phrase: 'signed off in review' },
  'review-flagged': { title: 'Review: flagged for peer review', phrase: 'flagged for peer review' },
  'review-discussed': { title: 'Review: peer review closed', phrase: 'peer review closed' },
} as const satisfies Record<string, EventWords>;

export type CaseEventKind = keyof typeof EVENT_WORDS;
export const CASE_EVENT_KINDS = Object.keys(EVENT_WORDS) as CaseEventKind[];
export const CREW_EVENT_KINDS: ReadonlySet<string> = new Set(CASE_EVENT_KINDS.filter((kind) => 'crew' in EVENT_WORDS[kind]));

const known = (kind: string): kind is CaseEventKind => Object.hasOwn(EVENT_WORDS, kind);

/** A step's title; an unknown kind still reads (dashes become spaces). */
export const eventTitle = (kind: string): string => (known(kind) ? EVENT_WORDS[kind].title : kind.replace(/-/g, ' ').replace(/^./, (c) => c.toUpperCase()));

/** A step in a sentence; an unknown kind reads as its id. */
export const eventPhrase = (kind: string): string => (known(kind) ? EVENT_WORDS[kind].phrase : kind);
