import type { Knex } from 'knex';
import { EXAMPLE_POLICY, Policy } from '../../shared/triage/policy';

// A published version never changes, so its parsed form can be kept; the engine compiles a
// policy once per object, and this keeps it the same object.
const publishedCache = new Map<string, Policy>();

/**
 * The policy that decides a new evaluation at this hospital now: its latest published version
 * whose effective date has come, or the shipped example until the hospital publishes its own.
 */
export async function policyInForce(db: Knex, hospitalId: number, at: number): Promise<Policy> {
  const row = await db('policy_versions')
    .where({ hospital_id: hospitalId, status: 'published' })
    .andWhere('effective_from', '<=', at)
    .orderBy([{ column: 'effective_from', order: 'desc' }, { column: 'version', order: 'desc' }])
    .first('id', 'document');
  if (!row) return EXAMPLE_POLICY;
  let policy = publishedCache.get(String(row.id));
  if (!policy) {
    policy = Policy.parse(JSON.parse(row.document));
    publishedCache.set(String(row.id), policy);
  }
  return policy;
}
