import type { NextFunction, Request, Response } from 'express';
import type { Knex } from 'knex';
import type { Me, Role } from '../../shared/roles';
import { actingRole, mayDo, needsRoles, type Action } from '../../shared/access';
import { forbidden, unauthenticated } from '../errors';
import { findMe } from '../services/people/users';

declare global {
  // eslint-disable-next-line @typescript-eslint/no-namespace
  namespace Express {
    interface Request { me?: Me }
  }
}

/** Loads the signed-in person on every request, so a deactivated user or a changed role counts at once. */
export async function loadMe(db: Knex, userId: number | undefined, claimedRoles?: Role[]): Promise<Me | null> {
  if (!userId) return null;
  return (await findMe(db, userId, claimedRoles)) ?? null;
}

export function requireUser(db: Knex) {
  return async (req: Request, _res: Response, next: NextFunction) => {
    const me = await loadMe(db, req.session?.userId, req.session?.claimedRoles);
    if (!me) return next(unauthenticated());
    req.me = me;
    next();
  };
}

/** A route's guard for one action of the access map; the guard names its action, so a test can compare routes with the map. */
export function requireAccess(action: Action) {
  const guard = (req: Request, _res: Response, next: NextFunction) => {
    const me = req.me;
    if (!me) return next(unauthenticated());
    if (!mayDo(me.roles, action)) return next(forbidden(needsRoles(action)));
    next();
  };
  return Object.assign(guard, { access: action });
}

export const hospitalIdsOf = (me: Me) => me.memberships.filter((m) => m.kind === 'hospital').map((m) => m.id);
export const agencyIdsOf = (me: Me) => me.memberships.filter((m) => m.kind === 'agency').map((m) => m.id);

export function assertHospital(me: Me, hospitalId: number): void {
  if (!hospitalIdsOf(me).includes(hospitalId)) throw forbidden('That hospital is not one of yours.');
}

export function assertAgency(me: Me, agencyId: number): void {
  if (!agencyIdsOf(me).includes(agencyId)) throw forbidden('That ambulance agency is not one of yours.');
}

export const may = (me: Me, action: Action): boolean => mayDo(me.roles, action);

/** Refuses a person whose roles do not open the action. */
export function assertMay(me: Me, action: Action): void {
  if (!may(me, action)) throw forbidden(needsRoles(action));
}

/** The role a person acts in for an action, for the audit trail (refused when none of theirs opens it). */
export function roleFor(me: Me, action: Action): Role {
  const role = actingRole(me.roles, action);
  if (!role) throw forbidden(needsRoles(action));
  return role;
}
