import { randomBytes } from 'node:crypto';
import type { Knex } from 'knex';
import type { Me } from '../../shared/roles';
import type { MachineClientView, RegisterMachineClient } from '../../shared/schemas/machine-clients';
import { agencyIdsOf, roleFor } from '../auth/guards';
import { forbidden, invalid, notFound } from '../errors';
import { identityStoreFor } from '../idp/store';
import { appendAudit } from '../services/audit/audit';

export interface MachineClientRow {
  id: number; client_id: string; name: string; agency_id: number; agency_name: string; user_id: number; user_email: string;
  requests_per_minute: number; active: number | boolean; created_at: number; revoked_at: number | null;
}

const actorOf = (me: Me) => ({ id: me.user.id, role: roleFor(me, 'machine-clients.manage') });

function clientRows(db: Knex) {
  return db('machine_clients as mc')
    .join('agencies as a', 'a.id', 'mc.agency_id')
    .join('users as u', 'u.id', 'mc.user_id')
    .select('mc.*', 'a.name as agency_name', 'u.email as user_email');
}

const view = (row: MachineClientRow): MachineClientView => ({
  id: row.id,
  clientId: row.client_id,
  name: row.name,
  agency: { id: row.agency_id, name: row.agency_name },
  requestsPerMinute: row.requests_per_minute,
  active: Boolean(row.active),
  createdAt: Number(row.created_at),
  revokedAt: row.revoked_at == null ? null : Number(row.revoked_at),
});

/** The client, if it is registered and not revoked. */
export async function activeMachineClient(db: Knex, clientId: string): Promise<MachineClientRow | undefined> {
  if (!clientId) return undefined;
  return (await clientRows(db).where('mc.client_id', clientId).andWhere('mc.active', true).first()) as MachineClientRow | undefined;
}

export async function listMachineClients(db: Knex, me: Me): Promise<MachineClientView[]> {
  const rows = (await clientRows(db).whereIn('mc.agency_id', agencyIdsOf(me)).orderBy([{ column: 'mc.active', order: 'desc' }, { column: 'mc.name' }])) as MachineClientRow[];
  return rows.map(view);
}

/**
 * Registers a client for one of the admin's agencies: its own account (the actor its cases and
 * audit rows name, never able to sign in) and its OAuth client in the identity provider's store,
 * where it survives a restart. The secret is made here and returned once.
 */
export async function registerMachineClient(db: Knex, clock: { now(): number }, me: Me, request: RegisterMachineClient): Promise<{ client: MachineClientView; clientSecret: string }> {
  if (!agencyIdsOf(me).includes(request.agencyId)) throw invalid([{ field: 'agencyId', message: 'is not one of your ambulance agencies' }]);
  const clientId = `plumbline-mc-${randomBytes(9).toString('base64url')}`;
  const clientSecret = randomBytes(32).toString('base64url');
  const at = clock.now();
  const id = await db.transaction(async (trx) => {
    const [user] = await trx('users')
      .insert({ email: `${clientId}@machine-clients.invalid`, name: `${request.name} (machine client)`, password_hash: null, active: false, created_at: at })
      .returning('id');
    const [row] = await trx('machine_clients')
      .insert({ client_id: clientId, name: request.name, agency_id: request.agencyId, user_id: user.id, requests_per_minute: request.requestsPerMinute, active: true, created_by: me.user.id, created_at: at })
      .returning('id');
    const Store = identityStoreFor(trx, clock);
    await new Store('Client').upsert(clientId, {
      client_id: clientId,
      client_secret: clientSecret,
      client_name: request.name,
      grant_types: ['client_credentials'],
      response_types: [],
      redirect_uris: [],
      token_endpoint_auth_method: 'client_secret_basic',
    }, 0);
    await appendAudit(trx, { at, actor: actorOf(me), action: 'machine-client.registered', entity: 'agency', entityId: request.agencyId, after: { clientId, name: request.name, requestsPerMinute: request.requestsPerMinute } });
    return row.id as number;
  });
  return { client: view((await clientRows(db).where('mc.id', id).first()) as MachineClientRow), clientSecret };
}

/** Revokes a client: its OAuth registration goes, so no new token is issued, and tokens in hand stop at once. */
export async function revokeMachineClient(db: Knex, clock: { now(): number }, me: Me, id: number): Promise<MachineClientView> {
  const row = (await clientRows(db).where('mc.id', id).first()) as MachineClientRow | undefined;
  if (!row) throw notFound('That machine client');
  if (!agencyIdsOf(me).includes(row.agency_id)) throw forbidden('That machine client belongs to another agency.');
  const at = clock.now();
  await db.transaction(async (trx) => {
    await trx('machine_clients').where({ id }).update({ active: false, revoked_at: at });
    await new (identityStoreFor(trx, clock))('Client').destroy(row.client_id);
    await appendAudit(trx, { at, actor: actorOf(me), action: 'machine-client.revoked', entity: 'agency', entityId: row.agency_id, before: { clientId: row.client_id, active: Boolean(row.active) }, after: { active: false } });
  });
  return view((await clientRows(db).where('mc.id', id).first()) as MachineClientRow);
}
