import { apiGet } from './http';

import type { Role } from '../../shared/roles';

// The role ids are the server's (shared/roles.ts); the answer's other types are described here.
export type { Role };

export interface Membership {
  kind: 'hospital' | 'agency';
  id: number;
  name: string;
}

export interface MeResponse {
  user: { id: number; email: string; name: string };
  roles: Role[];
  memberships: Membership[];
}

/** Rejects with an ApiError of status 401 when nobody is signed in. */
export function getMe(): Promise<MeResponse> {
  return apiGet<MeResponse>('/api/me');
}

/** The server sends the browser back to `returnTo` (a path inside Plumbline) after sign-in. */
export function signInUrl(returnTo: string): string {
  return `/auth/login?returnTo=${encodeURIComponent(returnTo)}`;
}

/**
 * A real form POST rather than fetch: the browser must follow the redirects all the way to the
 * identity provider's end-session page, and a form submission carries the Origin header the
 * server checks.
 */
export function signOut(): void {
  const form = document.createElement('form');
  form.method = 'POST';
  form.action = '/auth/logout';
  form.hidden = true;
  document.body.append(form);
  form.submit();
}
