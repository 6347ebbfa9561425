import type { Knex } from 'knex';
import { EXAMPLE_POLICY, Policy } from '../../shared/triage/policy';

// The engine compiles a policy once per object; keyed by the stored text, the same version
// stays the same object across evaluations.
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
    .first('document');
  if (!row) return EXAMPLE_POLICY;
  let policy = publishedCache.get(row.document);
  if (!policy) {
    policy = Policy.parse(JSON.parse(row.document));
    publishedCache.set(row.document, policy);
  }
  return policy;
}
