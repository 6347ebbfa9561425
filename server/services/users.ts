import type { Knex } from 'knex';
import { Role, type Me, type Membership } from '../../shared/roles';

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

/** What the signed-in person is: their roles from our table (or the issuer's claim) and their memberships. */
export async function describeUser(db: Knex, user: UserRow, claimedRoles?: Role[]): Promise<Me> {
  const roles = claimedRoles ?? (await rolesOf(db, user.id));
  return {
    user: { id: user.id, email: user.email, name: user.name },
    roles,
    memberships: await membershipsOf(db, user.id),
  };
}
