import type { Role } from './roles';

/**
 * Where an allowed role may use an action. The role opens the action; the scope says whose data
 * it reaches, and the server checks it against the caller's memberships on every request.
 */
export type Scope = 'own-hospital' | 'own-hospitals' | 'own-agency' | 'own-hospitals-and-agencies' | 'own-places' | 'no-place';

export const SCOPE_WORDS: Record<Scope, string> = {
  'own-hospital': 'the hospital named must be one of the caller’s',
  'own-hospitals': 'any of the caller’s hospitals, or one of them when named',
  'own-agency': 'the ambulance agency (or its unit) must be one of the caller’s',
  'own-hospitals-and-agencies': 'cases of the caller’s hospitals and ambulance agencies',
  'own-places': 'the hospitals and ambulance agencies the caller belongs to',
  'no-place': 'no hospital’s or agency’s data',
};

export interface Rule {
  /** Roles that may do it, in order of preference: a person with several acts as the first they hold. */
  roles: readonly Role[];
  scope: Scope;
}

/**
 * Who may do what, declared once. The server's route guards, its socket commands and services,
 * the OpenAPI document, and the client's screens and buttons all read this map; a role added to
 * an action here is added everywhere.
 */
export const ACCESS = {
  /** Read cases and their FHIR bundles: crews their agency's, ED staff their hospital's. */
  'cases.read': { roles: ['paramedic', 'charge_nurse', 'trauma_lead', 'quality', 'admin'], scope: 'own-hospitals-and-agencies' },
  /** Send, update, cancel and redirect pre-alerts; see the agency's destinations. */
  'pre-alerts.send': { roles: ['paramedic'], scope: 'own-agency' },
  /** Watch the inbound board, its bays and who is coming to a page; print a handover. */
  'board.read': { roles: ['charge_nurse', 'trauma_lead', 'admin'], scope: 'own-hospital' },
  /** Acknowledge, decide the level, page the team and the other board actions. */
  'board.act': { roles: ['charge_nurse'], scope: 'own-hospital' },
  'bays.edit': { roles: ['admin'], scope: 'own-hospital' },
  /** Read policy versions and preview a local criterion. */
  'policies.read': { roles: ['admin', 'trauma_lead'], scope: 'own-hospital' },
  /** Start, save and discard a draft policy. */
  'policies.draft': { roles: ['admin'], scope: 'own-hospital' },
  /** Approve a draft (never one's own). */
  'policies.approve': { roles: ['trauma_lead'], scope: 'own-hospital' },
  'policies.publish': { roles: ['trauma_lead', 'admin'], scope: 'own-hospital' },
  /** Read the activation review, a case's timeline, response-time compliance and the audit chain. */
  'review.read': { roles: ['trauma_lead', 'admin', 'quality'], scope: 'own-hospitals' },
  /** Sign off, flag for peer review, close a peer review. */
  'review.write': { roles: ['trauma_lead', 'admin'], scope: 'own-hospital' },
  /** Change response-time targets. */
  'review.settings': { roles: ['admin'], scope: 'own-hospital' },
  /** The triage quality report, its drill-down, what-ifs, targets and FHIR export. */
  'quality.read': { roles: ['quality', 'admin', 'trauma_lead'], scope: 'own-hospital' },
  /** Import registry outcomes and set the quality targets. */
  'quality.manage': { roles: ['quality', 'admin'], scope: 'own-hospital' },
  /** People, hospitals, agencies and units. */
  'people.manage': { roles: ['admin'], scope: 'own-places' },
  'machine-clients.manage': { roles: ['admin'], scope: 'own-agency' },
  /** A hospital's paging plan and people's paging contacts. */
  'paging.manage': { roles: ['admin'], scope: 'own-hospital' },
  /** Everything sent, e-mail and SMS. */
  'messages.read': { roles: ['admin'], scope: 'own-hospitals' },
  /** The trauma programme's address for audit checkpoints. */
  'audit.settings': { roles: ['admin'], scope: 'own-hospital' },
  /** The API reference page. */
  'docs.read': { roles: ['admin'], scope: 'no-place' },
} as const satisfies Record<string, Rule>;

export type Action = keyof typeof ACCESS;
export const ACTIONS = Object.keys(ACCESS) as Action[];

export const rolesFor = (action: Action): readonly Role[] => ACCESS[action].roles;

export const mayDo = (roles: readonly Role[], action: Action): boolean => rolesFor(action).some((role) => roles.includes(role));

/** The role a person acts in for an action (recorded in the audit trail); undefined when none of theirs opens it. */
export const actingRole = (roles: readonly Role[], action: Action): Role | undefined => rolesFor(action).find((role) => roles.includes(role));

/** The refusal's text, naming the roles that would do. */
export const needsRoles = (action: Action): string => `This needs one of these roles: ${rolesFor(action).join(', ')}.`;

/** Whether a client screen opens: a public one to all, one without an action to anyone signed in, else by the map. */
export function canOpen(screen: { access?: Action; public?: boolean }, roles: readonly Role[]): boolean {
  if (screen.public) return true;
  return screen.access === undefined || mayDo(roles, screen.access);
}
