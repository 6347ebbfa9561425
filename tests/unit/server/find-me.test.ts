import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Knex } from 'knex';
import { createDb, migrate } from '../../../server/db';
import { seedDemo, type DemoIds } from '../../../server/services/demo/seed';
import { findMe, membershipsOf, rolesOf } from '../../../server/services/people/users';

let db: Knex;
let ids: DemoIds;
const clock = { now: () => Date.UTC(2026, 11, 2, 3, 0) };

beforeAll(async () => {
  db = createDb(':memory:');
  await migrate(db);
  ids = await seedDemo(db, clock);
});
afterAll(() => db.destroy());

describe('who is signed in, read in one query', () => {
  it('gives every role once and every membership once, in membership order, when a person has several of each', async () => {
    const admin = ids.users['admin@plumbline.test'];
    // A second role besides the seeded one: the joined rows then number roles × memberships.
    await db('user_roles').insert({ user_id: admin, role: 'quality' });
    const me = (await findMe(db, admin))!;
    expect(me.user).toEqual({ id: admin, email: 'admin@plumbline.test', name: 'Kit Marchetti' });
    expect(me.roles).toEqual(['admin', 'quality']);
    expect(me.memberships.map((m) => [m.kind, m.id])).toEqual([['hospital', ids.hospitals.general], ['hospital', ids.hospitals.community], ['agency', ids.agency]]);
    // The same as the separate reads of roles and memberships that other screens use.
    expect(me.roles).toEqual([...(await rolesOf(db, admin))].sort());
    expect(me.memberships).toEqual(await membershipsOf(db, admin));
  });

  it('names the agency of a paramedic', async () => {
    const me = (await findMe(db, ids.users['paramedic@plumbline.test']))!;
    expect(me.roles).toEqual(['paramedic']);
    expect(me.memberships).toEqual([{ kind: 'agency', id: ids.agency, name: expect.any(String) }]);
    expect(me.memberships[0].name.length).toBeGreaterThan(0);
  });

  it('takes the issuer’s claimed roles over the table', async () => {
    const me = (await findMe(db, ids.users['nurse@plumbline.test'], ['trauma_lead']))!;
    expect(me.roles).toEqual(['trauma_lead']);
    expect(me.memberships.map((m) => m.id)).toEqual([ids.hospitals.general]);
  });

  it('finds nobody for a deactivated user, a user with no roles still being found', async () => {
    const lead = ids.users['lead@plumbline.test'];
    await db('users').where({ id: lead }).update({ active: false });
    expect(await findMe(db, lead)).toBeUndefined();
    await db('users').where({ id: lead }).update({ active: true });
    await db('user_roles').where({ user_id: lead }).delete();
    expect((await findMe(db, lead))!.roles).toEqual([]);
    expect(await findMe(db, 999_999)).toBeUndefined();
  });
});
