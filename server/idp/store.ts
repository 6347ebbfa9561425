import type { Knex } from 'knex';
import type { Adapter, AdapterPayload } from 'oidc-provider';

/** oidc-provider's storage contract over our database, one table for every model. */
export function identityStoreFor(db: Knex, clock: { now(): number }): new (model: string) => Adapter {
  return class IdentityStore implements Adapter {
    constructor(private readonly model: string) {}

    async upsert(id: string, payload: AdapterPayload, expiresIn: number): Promise<void> {
      const row = {
        model: this.model,
        id,
        payload: JSON.stringify(payload),
        uid: payload.uid ?? null,
        grant_id: payload.grantId ?? null,
        user_code: payload.userCode ?? null,
        expires_at: expiresIn ? clock.now() + expiresIn * 1000 : null,
      };
      await db('identity_store').insert(row).onConflict(['model', 'id']).merge();
    }

    private async findWhere(where: Record<string, string>): Promise<AdapterPayload | undefined> {
      const row = await db('identity_store').where({ model: this.model, ...where }).first();
      if (!row) return undefined;
      if (row.expires_at != null && Number(row.expires_at) <= clock.now()) {
        await db('identity_store').where({ model: this.model, id: row.id }).delete();
        return undefined;
      }
      const payload = JSON.parse(row.payload) as AdapterPayload;
      return row.consumed_at != null ? { ...payload, consumed: Math.floor(Number(row.consumed_at) / 1000) } : payload;
    }

    find(id: string) {
      return this.findWhere({ id });
    }

    findByUid(uid: string) {
      return this.findWhere({ uid });
    }

    findByUserCode(userCode: string) {
      return this.findWhere({ user_code: userCode });
    }

    async consume(id: string): Promise<void> {
      await db('identity_store').where({ model: this.model, id }).update({ consumed_at: clock.now() });
    }

    async destroy(id: string): Promise<void> {
      await db('identity_store').where({ model: this.model, id }).delete();
    }

    async revokeByGrantId(grantId: string): Promise<void> {
      await db('identity_store').where({ grant_id: grantId }).delete();
    }
  };
}

/**
 * Ends what the built-in provider holds for a person: its sign-in sessions (which would let the
 * next sign-in skip the password), grants and any tokens. Answers how many sessions ended.
 */
export async function endIdentitySessionsOf(db: Knex, userId: number): Promise<number> {
  const accountOf = db.client.config.client === 'pg' ? "(payload::json->>'accountId')" : "json_extract(payload, '$.accountId')";
  const sessions = await db('identity_store').where({ model: 'Session' }).whereRaw(`${accountOf} = ?`, [String(userId)]).delete();
  await db('identity_store').whereIn('model', ['Grant', 'AccessToken', 'AuthorizationCode', 'RefreshToken']).whereRaw(`${accountOf} = ?`, [String(userId)]).delete();
  return sessions;
}
