import { mayDo, type Action } from '../../shared/access';
import type { Role } from '../api/me';

/** A screen with no action is for anyone signed in; public routes need no sign-in at all. */
export function canOpen(meta: { access?: Action; public?: boolean }, roles: readonly Role[]): boolean {
  if (meta.public) return true;
  return meta.access === undefined || mayDo(roles, meta.access);
}
