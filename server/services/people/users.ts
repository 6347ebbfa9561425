import type { Knex } from 'knex';
import { Role, type Me, type Membership } from '../../../shared/roles';

export interface UserRow { id: number; email: string; name: string; password_hash: string | null; active: number | boolean }

export function findUserByEmail(db: Knex, email: string): Promise<UserRow | undefined> {
  return db<UserRow>('users').whereRaw('lower(email) = ?', [email.trim().toLowerCase()]).first();
}

export function findUserById(db: Knex, id: number): Promise<UserRow | undefined> {
  return db<UserRow>('users').where({ id }).first();
}

export async function rolesOf(db: Knex, userId: number): Promise<Role[]> {
  const rows = await db('user_roles').where({ user_id: userId }).select('role');
  return rows.map((row) => Role.parse(row.role));
}

export async function membershipsOf(db: Knex, userId: number): Promise<Membership[]> {
  const rows = await db('memberships as m')
    .leftJoin('hospitals as h', 'h.id', 'm.hospital_id')
    .leftJoin('agencies as a', 'a.id', 'm.agency_id')
    .where('m.user_id', userId)
    .select('m.hospital_id', 'm.agency_id', 'h.name as hospital_name', 'a.name as agency_name')
    .orderBy('m.id');
  return rows.map((row) =>
    row.hospital_id != null
      ? { kind: 'hospital' as const, id: row.hospital_id, name: row.hospital_name }
      : { kind: 'agency' as const, id: row.agency_id, name: row.agency_name },
  );
}

/**
 * What the signed-in person is, in one query: the active user, their roles from our table (or the
 * issuer's claim) and their memberships. Undefined when there is no such active user. It runs on
 * every request and every socket connection, so a deactivated user or a changed role counts at once.
 */
export async function findMe(db: Knex, userId: number, claimedRoles?: Role[]): Promise<Me | undefined> {
  const rows = await db('users as u')
    .leftJoin('user_roles as r', 'r.user_id', 'u.id')
    .leftJoin('memberships as m', 'm.user_id', 'u.id')
    .leftJoin('hospitals as h', 'h.id', 'm.hospital_id')
    .leftJoin('agencies as a', 'a.id', 'm.agency_id')
    .where('u.id', userId)
    .andWhere('u.active', true)
    .select('u.email', 'u.name', 'r.role', 'm.id as membership_id', 'm.hospital_id', 'm.agency_id', 'h.name as hospital_name', 'a.name as agency_name')
    .orderBy([{ column: 'm.id' }, { column: 'r.role' }]);
  if (!rows.length) return undefined;
  const roles = new Set<Role>();
  const memberships = new Map<number, Membership>();
  for (const row of rows) {
    if (row.role != null) roles.add(Role.parse(row.role));
    if (row.membership_id != null && !memberships.has(row.membership_id)) {
      memberships.set(
        row.membership_id,
        row.hospital_id != null ? { kind: 'hospital', id: row.hospital_id, name: row.hospital_name } : { kind: 'agency', id: row.agency_id, name: row.agency_name },
      );
    }
  }
  return {
    user: { id: userId, email: rows[0].email, name: rows[0].name },
    roles: claimedRoles ?? [...roles].sort(),
    memberships: [...memberships.values()],
  };
}
