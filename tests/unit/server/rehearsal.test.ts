import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Knex } from 'knex';
import { createDb, migrate } from '../../../server/db';
import { seedDemo } from '../../../server/services/demo/seed';
import { rehearsePreAlerts } from '../../../server/services/cases/rehearsal';
import { submitPreAlert } from '../../../server/services/cases/commands';
import { listCaseSummaries } from '../../../server/services/cases/summary';
import { verifyAuditChain } from '../../../server/services/audit/audit';
import { loadMe } from '../../../server/auth/guards';

let db: Knex;
const clock = { now: () => Date.UTC(2026, 11, 2, 3, 0) };
const count = async (table: string) => Number((await db(table).count({ n: '*' }).first())!.n);
const tables = ['cases', 'case_revisions', 'case_events', 'audit_log'];

beforeAll(async () => {
  db = createDb(':memory:');
  await migrate(db);
});
afterAll(() => db.destroy());

describe('the pre-alert rehearsal before listening', () => {
  it('does nothing without a paramedic to act as', async () => {
    expect(await rehearsePreAlerts(db, clock)).toBe(0);
  });

  it('runs its rounds and leaves no case, revision, event, audit row or id behind', async () => {
    const ids = await seedDemo(db, clock);
    const before = await Promise.all(tables.map(count));
    const chainBefore = await verifyAuditChain(db);
    expect(await rehearsePreAlerts(db, clock, 5)).toBe(5);
    expect(await Promise.all(tables.map(count))).toEqual(before);
    expect(await verifyAuditChain(db)).toEqual(chainBefore);
    // The next real case takes the id it would have taken without the rehearsal, and reads whole.
    const last = (await db('cases').max({ id: 'id' }).first())!.id as number;
    const me = (await loadMe(db, ids.users['paramedic@plumbline.test']))!;
    const { caseId } = await submitPreAlert(db, clock, { me, role: 'paramedic' }, { clientId: crypto.randomUUID(), hospitalId: ids.hospitals.general, etaMinutes: 5, clinical: { ageYears: 40, fall: { heightM: 1 } } } as never);
    expect(caseId).toBe(last + 1);
    const [summary] = await listCaseSummaries(db, { ids: [caseId] });
    expect([summary.revision, summary.latest.input.ageYears, summary.caseNumber]).toEqual([1, 40, `P26-${String(caseId).padStart(5, '0')}`]);
  });
});
