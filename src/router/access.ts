import type { RouteMeta } from 'vue-router';
import type { Role } from '@/api/me';

/** An empty role list means any signed-in person; public routes need no sign-in at all. */
export function canOpen(meta: RouteMeta, roles: readonly Role[]): boolean {
  if (meta.public) return true;
  const allowed = meta.roles ?? [];
  return allowed.length === 0 || allowed.some((role) => roles.includes(role));
}
