import express from 'express';
import { randomUUID } from 'node:crypto';
import type { AddressInfo } from 'node:net';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Role } from '../../shared/roles';
import { SESSION_COOKIE } from '../../server/auth/session';
import { startTestServer, type TestServer } from '../support/server';
import { browserlessClient, signIn, signInWith, type SignedInClient } from '../support/sign-in';
import { command, connectAs, type TestSocket } from '../support/socket';
import { createForeignRegion, FOREIGN_PASSWORD, foreignAccounts, type ForeignRegion } from '../support/foreign-region';

// Every route and socket command against every role, signed out, and from another county's
// hospital and agency. The table is compared with the routes the running app really has, so a
// route added without an entry here fails this file.

const ROLES: Role[] = ['paramedic', 'charge_nurse', 'trauma_lead', 'quality', 'admin'];
const DEMO_EMAIL: Record<Role, string> = {
  paramedic: 'paramedic@plumbline.test',
  charge_nurse: 'nurse@plumbline.test',
  trauma_lead: 'lead@plumbline.test',
  quality: 'quality@plumbline.test',
  admin: 'admin@plumbline.test',
};

interface Ids { general: number; agency: number; unit: number; liveCase: number; closedCase: number; flaggedReview: number; nurse: number; draft: number }
/** `public`: anyone, signed in or not; `signed-in`: any role; otherwise the roles let through. */
type Access = 'public' | 'signed-in' | readonly Role[];
interface RouteEntry {
  access: Access;
  /** A request that gets past the guards without changing anything: an unknown id or an incomplete body. */
  request: (ids: Ids) => { path: string; body?: unknown };
  /** What an allowed caller gets for that request. */
  allowed: number;
}

const NONE = 999_999;
const period = 'from=2026-01-01&to=2026-12-31';
const readersOfReview = ['trauma_lead', 'admin', 'quality'] as const;
const readersOfQuality = ['quality', 'admin', 'trauma_lead'] as const;
const all = ROLES;

const TABLE: Record<string, RouteEntry> = {
  'GET /api/health': { access: 'public', request: () => ({ path: '/api/health' }), allowed: 200 },
  'GET /api/health/ready': { access: 'public', request: () => ({ path: '/api/health/ready' }), allowed: 200 },
  'GET /api/me': { access: 'signed-in', request: () => ({ path: '/api/me' }), allowed: 200 },
  'GET /api/mail': { access: ['admin'], request: () => ({ path: '/api/mail' }), allowed: 200 },

  'GET /api/cases': { access: all, request: () => ({ path: '/api/cases?state=all' }), allowed: 200 },
  'GET /api/cases/:id': { access: all, request: (ids) => ({ path: `/api/cases/${ids.liveCase}` }), allowed: 200 },

  'GET /api/policies': { access: ['admin', 'trauma_lead'], request: (ids) => ({ path: `/api/policies?hospitalId=${ids.general}` }), allowed: 200 },
  'GET /api/policies/:id': { access: ['admin', 'trauma_lead'], request: (ids) => ({ path: `/api/policies/${ids.draft}` }), allowed: 200 },
  'POST /api/policies': { access: ['admin'], request: () => ({ path: '/api/policies', body: {} }), allowed: 400 },
  'PUT /api/policies/:id': { access: ['admin'], request: (ids) => ({ path: `/api/policies/${ids.draft}`, body: {} }), allowed: 400 },
  'DELETE /api/policies/:id': { access: ['admin'], request: () => ({ path: `/api/policies/${NONE}` }), allowed: 404 },
  'POST /api/policies/:id/approve': { access: ['trauma_lead'], request: () => ({ path: `/api/policies/${NONE}/approve` }), allowed: 404 },
  'POST /api/policies/local-preview': {
    access: ['admin', 'trauma_lead'],
    request: (ids) => ({ path: '/api/policies/local-preview', body: { hospitalId: ids.general, condition: { join: 'all', heightUnit: 'ft', parts: [{ kind: 'measure', measure: 'fallHeight', comparison: 'above', value: 15 }] } } }),
    allowed: 200,
  },
  'POST /api/policies/:id/publish': { access: ['admin', 'trauma_lead'], request: () => ({ path: `/api/policies/${NONE}/publish` }), allowed: 404 },

  'GET /api/people/users': { access: ['admin'], request: () => ({ path: '/api/people/users' }), allowed: 200 },
  'POST /api/people/users': { access: ['admin'], request: () => ({ path: '/api/people/users', body: {} }), allowed: 400 },
  'PATCH /api/people/users/:id': { access: ['admin'], request: (ids) => ({ path: `/api/people/users/${ids.nurse}`, body: { name: '' } }), allowed: 400 },
  'POST /api/people/users/:id/reactivate': { access: ['admin'], request: () => ({ path: `/api/people/users/${NONE}/reactivate` }), allowed: 404 },
  'POST /api/people/users/:id/password': { access: ['admin'], request: () => ({ path: `/api/people/users/${NONE}/password`, body: { password: 'long-enough-1' } }), allowed: 404 },
  'POST /api/people/users/:id/deactivate': { access: ['admin'], request: () => ({ path: `/api/people/users/${NONE}/deactivate` }), allowed: 404 },
  'GET /api/people/hospitals': { access: ['admin'], request: () => ({ path: '/api/people/hospitals' }), allowed: 200 },
  'POST /api/people/hospitals': { access: ['admin'], request: () => ({ path: '/api/people/hospitals', body: {} }), allowed: 400 },
  'PATCH /api/people/hospitals/:id': { access: ['admin'], request: (ids) => ({ path: `/api/people/hospitals/${ids.general}`, body: { escalationMinutes: 'soon' } }), allowed: 400 },
  'GET /api/people/agencies': { access: ['admin'], request: () => ({ path: '/api/people/agencies' }), allowed: 200 },
  'POST /api/people/agencies': { access: ['admin'], request: () => ({ path: '/api/people/agencies', body: {} }), allowed: 400 },
  'PATCH /api/people/agencies/:id': { access: ['admin'], request: (ids) => ({ path: `/api/people/agencies/${ids.agency}`, body: {} }), allowed: 400 },
  'POST /api/people/agencies/:id/units': { access: ['admin'], request: (ids) => ({ path: `/api/people/agencies/${ids.agency}/units`, body: {} }), allowed: 400 },
  'PUT /api/people/agencies/:id/destinations': { access: ['admin'], request: (ids) => ({ path: `/api/people/agencies/${ids.agency}/destinations`, body: {} }), allowed: 400 },
  'PATCH /api/people/units/:id': { access: ['admin'], request: (ids) => ({ path: `/api/people/units/${ids.unit}`, body: { active: 'maybe' } }), allowed: 400 },

  'GET /api/review/cases': { access: readersOfReview, request: (ids) => ({ path: `/api/review/cases?hospitalId=${ids.general}` }), allowed: 200 },
  'GET /api/review/cases.csv': { access: readersOfReview, request: (ids) => ({ path: `/api/review/cases.csv?hospitalId=${ids.general}` }), allowed: 200 },
  'GET /api/review/cases/:id': { access: readersOfReview, request: (ids) => ({ path: `/api/review/cases/${ids.closedCase}` }), allowed: 200 },
  'POST /api/review/cases/:id/sign-off': { access: ['trauma_lead', 'admin'], request: () => ({ path: `/api/review/cases/${NONE}/sign-off`, body: {} }), allowed: 404 },
  'POST /api/review/cases/:id/flag': { access: ['trauma_lead', 'admin'], request: (ids) => ({ path: `/api/review/cases/${ids.closedCase}/flag`, body: {} }), allowed: 400 },
  'GET /api/review/discussion': { access: readersOfReview, request: (ids) => ({ path: `/api/review/discussion?hospitalId=${ids.general}` }), allowed: 200 },
  'POST /api/review/reviews/:id/close': { access: ['trauma_lead', 'admin'], request: (ids) => ({ path: `/api/review/reviews/${ids.flaggedReview}/close`, body: {} }), allowed: 400 },
  'GET /api/review/compliance': { access: readersOfReview, request: (ids) => ({ path: `/api/review/compliance?hospitalId=${ids.general}` }), allowed: 200 },
  'GET /api/review/audit-chain': { access: readersOfReview, request: () => ({ path: '/api/review/audit-chain' }), allowed: 200 },
  'GET /api/review/settings': { access: readersOfReview, request: (ids) => ({ path: `/api/review/settings?hospitalId=${ids.general}` }), allowed: 200 },
  'PUT /api/review/settings': { access: ['admin'], request: () => ({ path: '/api/review/settings', body: {} }), allowed: 400 },

  'GET /api/audit/programme-email': { access: ['admin'], request: (ids) => ({ path: `/api/audit/programme-email?hospitalId=${ids.general}` }), allowed: 200 },
  'PUT /api/audit/programme-email': { access: ['admin'], request: () => ({ path: '/api/audit/programme-email', body: {} }), allowed: 400 },

  'GET /api/crew/destinations': { access: ['paramedic'], request: () => ({ path: '/api/crew/destinations' }), allowed: 200 },

  'GET /api/hospitals/:id/bays': { access: ['charge_nurse', 'trauma_lead', 'admin'], request: (ids) => ({ path: `/api/hospitals/${ids.general}/bays` }), allowed: 200 },
  'PUT /api/hospitals/:id/bays': { access: ['admin'], request: (ids) => ({ path: `/api/hospitals/${ids.general}/bays`, body: { bays: ['Resus 1', 'resus 1'] } }), allowed: 400 },
  'GET /api/board': { access: ['charge_nurse', 'trauma_lead', 'admin'], request: (ids) => ({ path: `/api/board?hospitalId=${ids.general}` }), allowed: 200 },
  ...Object.fromEntries(
    ['acknowledge', 'decide', 'bay', 'page', 'arrived', 'team-at-bedside', 'close'].map((action) => [
      `POST /api/cases/:id/${action}`,
      { access: ['charge_nurse'], request: (ids: Ids) => ({ path: `/api/cases/${ids.liveCase}/${action}`, body: {} }), allowed: 400 } satisfies RouteEntry,
    ]),
  ),

  'GET /api/quality/outcomes/template.csv': { access: readersOfQuality, request: () => ({ path: '/api/quality/outcomes/template.csv' }), allowed: 200 },
  'POST /api/quality/outcomes/preview': { access: ['quality', 'admin'], request: () => ({ path: '/api/quality/outcomes/preview', body: {} }), allowed: 400 },
  'POST /api/quality/outcomes/import': { access: ['quality', 'admin'], request: () => ({ path: '/api/quality/outcomes/import', body: {} }), allowed: 400 },
  'GET /api/quality/report': { access: readersOfQuality, request: (ids) => ({ path: `/api/quality/report?hospitalId=${ids.general}&${period}` }), allowed: 200 },
  'GET /api/quality/report.csv': { access: readersOfQuality, request: (ids) => ({ path: `/api/quality/report.csv?hospitalId=${ids.general}&${period}` }), allowed: 200 },
  'GET /api/quality/cases': { access: readersOfQuality, request: (ids) => ({ path: `/api/quality/cases?hospitalId=${ids.general}&${period}` }), allowed: 200 },
  'GET /api/quality/policies': { access: readersOfQuality, request: (ids) => ({ path: `/api/quality/policies?hospitalId=${ids.general}` }), allowed: 200 },
  'POST /api/quality/what-if': { access: readersOfQuality, request: () => ({ path: '/api/quality/what-if', body: {} }), allowed: 400 },
  'GET /api/paging/hospitals/:id': { access: ['admin'], request: (ids) => ({ path: `/api/paging/hospitals/${ids.general}` }), allowed: 200 },
  'PUT /api/paging/hospitals/:id/plan': { access: ['admin'], request: (ids) => ({ path: `/api/paging/hospitals/${ids.general}/plan`, body: {} }), allowed: 400 },
  'PUT /api/paging/contacts/:id': { access: ['admin'], request: (ids) => ({ path: `/api/paging/contacts/${ids.nurse}`, body: {} }), allowed: 400 },
  'GET /api/paging/board': { access: ['charge_nurse', 'trauma_lead', 'admin'], request: (ids) => ({ path: `/api/paging/board?hospitalId=${ids.general}` }), allowed: 200 },
  'GET /api/paging/intervals': { access: readersOfReview, request: (ids) => ({ path: `/api/paging/intervals?hospitalId=${ids.general}` }), allowed: 200 },
  'GET /api/messages': { access: ['admin'], request: () => ({ path: '/api/messages' }), allowed: 200 },

  'GET /api/quality/targets': { access: readersOfQuality, request: (ids) => ({ path: `/api/quality/targets?hospitalId=${ids.general}` }), allowed: 200 },
  'PUT /api/quality/targets': { access: ['quality', 'admin'], request: () => ({ path: '/api/quality/targets', body: {} }), allowed: 400 },

  'GET /api/cases/:id/fhir': { access: all, request: (ids) => ({ path: `/api/cases/${ids.liveCase}/fhir` }), allowed: 200 },
  'GET /api/quality/export.ndjson': { access: readersOfQuality, request: (ids) => ({ path: `/api/quality/export.ndjson?hospitalId=${ids.general}&${period}&type=Patient` }), allowed: 200 },
  // For machine clients only: a person's session is no substitute for a bearer token, so everyone here gets 401
  // (the tokens themselves: tests/integration/machine-clients.test.ts).
  'POST /api/pre-alerts': { access: 'public', request: () => ({ path: '/api/pre-alerts', body: {} }), allowed: 401 },
  'GET /api/people/machine-clients': { access: ['admin'], request: () => ({ path: '/api/people/machine-clients' }), allowed: 200 },
  'POST /api/people/machine-clients': { access: ['admin'], request: () => ({ path: '/api/people/machine-clients', body: {} }), allowed: 400 },
  'POST /api/people/machine-clients/:id/revoke': { access: ['admin'], request: () => ({ path: `/api/people/machine-clients/${NONE}/revoke` }), allowed: 404 },
  'GET /api/openapi.json': { access: 'public', request: () => ({ path: '/api/openapi.json' }), allowed: 200 },
  'GET /api/docs': { access: ['admin'], request: () => ({ path: '/api/docs' }), allowed: 200 },
};

/** Sign-in, the identity provider's pages and the client's pages: open to anyone by design. */
const PUBLIC_PAGES: Record<string, { path: string; method: 'GET' | 'POST'; status: number | number[] }> = {
  'GET /auth/login': { method: 'GET', path: '/auth/login', status: 302 },
  // No sign-in under way in this session: a page saying so, not a sign-in.
  'GET /auth/callback': { method: 'GET', path: '/auth/callback?code=x&state=y', status: 400 },
  'POST /auth/logout': { method: 'POST', path: '/auth/logout', status: 303 },
  'GET /idp/interaction/:uid': { method: 'GET', path: '/idp/interaction/unknown', status: 400 },
  'POST /idp/interaction/:uid/login': { method: 'POST', path: '/idp/interaction/unknown/login', status: 400 },
  // The SMS provider's webhooks: outside the same-origin check, refused without the provider's signature.
  'POST /webhooks/sms/status': { method: 'POST', path: '/webhooks/sms/status', status: 403 },
  'POST /webhooks/sms/inbound': { method: 'POST', path: '/webhooks/sms/inbound', status: 403 },
  // 503 "client not built" while another run rebuilds dist/client; never a sign-in wall.
  'GET <client pages>': { method: 'GET', path: '/board', status: [200, 503] },
};

interface Layer { route?: { path: string | RegExp; methods: Record<string, boolean> }; handle?: { stack?: Layer[] } }

/** Every route the running app answers, found by walking its router, as "METHOD path". */
function routesOf(app: { router: { stack: Layer[] } }): string[] {
  const found: string[] = [];
  const walk = (stack: Layer[]) => {
    for (const layer of stack) {
      if (layer.route) {
        const path = typeof layer.route.path === 'string' ? layer.route.path : '<client pages>';
        for (const method of Object.keys(layer.route.methods)) if (method !== '_all') found.push(`${method.toUpperCase()} ${path}`);
      } else if (layer.handle?.stack) walk(layer.handle.stack);
    }
  };
  walk(app.router.stack);
  return found;
}

let server: TestServer;
let ids: Ids;
let foreign: ForeignRegion;
const as: Partial<Record<Role, SignedInClient>> = {};
const foreignAs: Partial<Record<Role, SignedInClient>> = {};

const call = (client: SignedInClient, method: string, path: string, body?: unknown) => (method === 'GET' ? client.get(path) : client.send(method, path, body));

beforeAll(async () => {
  server = await startTestServer();
  const db = server.db;
  const general = (await db('hospitals').where({ short_name: 'Alderwick General' }).first('id')).id;
  const agency = (await db('agencies').where({ name: 'Alderwick County Ambulance Service' }).first('id')).id;
  const unit = (await db('units').where({ agency_id: agency, call_sign: 'Medic 11' }).first('id')).id;
  const liveCase = (await db('cases').where({ hospital_id: general, agency_id: agency, state: 'en-route' }).orderBy('id').first('id')).id;
  const closedCase = (await db('cases').where({ hospital_id: general, state: 'closed' }).orderBy('id').first('id')).id;
  const flaggedReview = (await db('reviews as r').join('cases as c', 'c.id', 'r.case_id').where({ 'c.hospital_id': general, 'r.status': 'flagged' }).first('r.id')).id;
  const nurse = (await db('users').where({ email: DEMO_EMAIL.charge_nurse }).first('id')).id;
  foreign = await createForeignRegion(db);
  await Promise.all(ROLES.map(async (role) => (as[role] = await signIn(server.url, DEMO_EMAIL[role]))));
  await Promise.all(foreignAccounts.map(async (a) => (foreignAs[a.role] = await signIn(server.url, a.email, FOREIGN_PASSWORD))));
  const created = await as.admin!.send('POST', '/api/policies', { hospitalId: general, from: 'example' });
  expect(created.status).toBe(201);
  const draft = (await created.json()).id as number;
  ids = { general, agency, unit, liveCase, closedCase, flaggedReview, nurse, draft };
});
afterAll(() => server?.close());

describe('the access table', () => {
  it('names every route the running app has, and no route it lacks', () => {
    const app = server.http.listeners('request').find((l) => 'router' in l) as unknown as { router: { stack: Layer[] } };
    const actual = routesOf(app).sort();
    const declared = [...Object.keys(TABLE), ...Object.keys(PUBLIC_PAGES)].sort();
    expect(actual).toEqual(declared);
  });

  it.each(Object.entries(TABLE))('%s: 401 signed out, 403 for each role not allowed, the answer for each allowed role', async (key, entry) => {
    const method = key.split(' ')[0];
    const { path, body } = entry.request(ids);
    const anonymous = await call(browserlessClient(server.url), method, path, body);
    const expectedAnonymous = entry.access === 'public' ? entry.allowed : 401;
    expect(anonymous.status).toBe(expectedAnonymous);
    if (expectedAnonymous === 401) expect((await anonymous.json()).error.code).toBe('unauthenticated');

    const answers = await Promise.all(ROLES.map(async (role) => [role, (await call(as[role]!, method, path, body)).status] as const));
    const expected = ROLES.map((role) => [role, entry.access === 'public' || entry.access === 'signed-in' || entry.access.includes(role) ? entry.allowed : 403] as const);
    expect(answers).toEqual(expected);
  });

  it.each(Object.entries(PUBLIC_PAGES))('%s is open without a session and answers without a server error', async (_key, page) => {
    const client = browserlessClient(server.url);
    const res = await client.fetch(new URL(page.path, server.url), { method: page.method, redirect: 'manual', headers: { origin: server.url, accept: 'text/html' } });
    expect([page.status].flat()).toContain(res.status);
  });

  it('refuses a state-changing request from another site before it reaches any guard', async () => {
    const res = await as.admin!.fetch(new URL('/api/people/agencies', server.url), { method: 'POST', headers: { 'content-type': 'application/json', origin: 'https://elsewhere.invalid' }, body: JSON.stringify({ name: 'Planted Agency' }) });
    expect(res.status).toBe(403);
    expect((await res.json()).error.code).toBe('cross_site');
    expect(await server.db('agencies').where({ name: 'Planted Agency' }).first()).toBeUndefined();
  });
});

describe('another county’s people on Alderwick’s records', () => {
  // An existing record of another hospital or agency answers 403 ("not yours"), an id that
  // exists nowhere 404: ids are sequential and not secret, and a nurse told "not found" for a
  // case on a colleague's board would look for a fault that is not there. Lists simply leave
  // the other county out.
  it('a Brackwater charge nurse cannot open, list, see on the board or acknowledge an Alderwick case', async () => {
    const nurse = foreignAs.charge_nurse!;
    const before = await server.db('cases').where({ id: ids.liveCase }).first('row_version', 'acknowledged_at');
    expect((await nurse.get(`/api/cases/${ids.liveCase}`)).status).toBe(403);
    expect((await nurse.get(`/api/cases/${NONE}`)).status).toBe(404);
    const list = await (await nurse.get('/api/cases?state=all')).json();
    expect(list.cases).toEqual([]);
    expect((await nurse.get(`/api/board?hospitalId=${ids.general}`)).status).toBe(403);
    const own = await (await nurse.get('/api/board')).json();
    expect(own.hospital.id).toBe(foreign.hospitalId);
    expect(own.cases).toEqual([]);
    const ack = await nurse.send('POST', `/api/cases/${ids.liveCase}/acknowledge`, { rowVersion: before.row_version });
    expect(ack.status).toBe(403);
    expect((await ack.json()).error.message).toBe('That hospital is not one of yours.');
    expect(await server.db('cases').where({ id: ids.liveCase }).first('row_version', 'acknowledged_at')).toEqual(before);
  });

  it('a Brackwater trauma lead cannot read the review timeline, sign off, close a discussion, or read or approve Alderwick policies', async () => {
    const lead = foreignAs.trauma_lead!;
    const reviewsBefore = await server.db('reviews').count({ n: '*' }).first();
    const answers = await Promise.all([
      lead.get(`/api/review/cases/${ids.closedCase}`),
      lead.get(`/api/review/cases?hospitalId=${ids.general}`),
      lead.get(`/api/review/compliance?hospitalId=${ids.general}`),
      lead.get(`/api/review/settings?hospitalId=${ids.general}`),
      lead.get(`/api/review/discussion?hospitalId=${ids.general}`),
      lead.send('POST', `/api/review/cases/${ids.closedCase}/sign-off`, { comment: 'Looks right to me' }),
      lead.send('POST', `/api/review/reviews/${ids.flaggedReview}/close`, { outcome: 'Discussed, no change' }),
      lead.get(`/api/policies?hospitalId=${ids.general}`),
      lead.get(`/api/policies/${ids.draft}`),
      lead.send('POST', `/api/policies/${ids.draft}/approve`),
      lead.send('POST', `/api/policies/${ids.draft}/publish`, {}),
      lead.get(`/api/quality/report?hospitalId=${ids.general}&${period}`),
      lead.send('POST', '/api/policies/local-preview', { hospitalId: ids.general, condition: { join: 'all', heightUnit: 'ft', parts: [{ kind: 'flag', flag: 'anticoagulant' }] } }),
    ]);
    expect(answers.map((r) => r.status)).toEqual(Array(13).fill(403));
    const rows = await (await lead.get('/api/review/cases')).json();
    expect(rows.rows).toEqual([]);
    expect(await server.db('reviews').count({ n: '*' }).first()).toEqual(reviewsBefore);
    expect((await server.db('policy_versions').where({ id: ids.draft }).first('status')).status).toBe('draft');
  });

  it('the Brackwater quality team cannot read Alderwick’s quality report, drill-down, targets or what-if, nor import outcomes for it', async () => {
    const quality = foreignAs.quality!;
    const form = new FormData();
    form.set('hospitalId', String(ids.general));
    form.set('file', new Blob(['case_number,iss\r\nP26-00001,25\r\n'], { type: 'text/csv' }), 'outcomes.csv');
    const outcomesBefore = await server.db('outcomes').count({ n: '*' }).first();
    const answers = await Promise.all([
      quality.get(`/api/quality/report?hospitalId=${ids.general}&${period}`),
      quality.get(`/api/quality/report.csv?hospitalId=${ids.general}&${period}`),
      quality.get(`/api/quality/cases?hospitalId=${ids.general}&${period}`),
      quality.get(`/api/quality/targets?hospitalId=${ids.general}`),
      quality.get(`/api/quality/policies?hospitalId=${ids.general}`),
      quality.send('PUT', '/api/quality/targets', { hospitalId: ids.general, targets: { underTriageMax: 0.5, overTriageHospital: [0.1, 0.9], overTriageSystemMax: 0.9 } }),
      quality.send('POST', '/api/quality/what-if', { hospitalId: ids.general, from: '2026-01-01', to: '2026-12-31', policy: 'in-force' }),
      quality.fetch(new URL('/api/quality/outcomes/preview', server.url), { method: 'POST', headers: { origin: server.url }, body: form }),
      quality.get(`/api/review/cases/${ids.closedCase}`),
    ]);
    expect(answers.map((r) => r.status)).toEqual(Array(9).fill(403));
    expect(await server.db('outcomes').count({ n: '*' }).first()).toEqual(outcomesBefore);
  });

  it('a Brackwater administrator cannot change Alderwick’s hospital, people, agency, units, policies or settings, and lists show only Brackwater', async () => {
    const admin = foreignAs.admin!;
    const nurseBefore = await server.db('users').where({ id: ids.nurse }).first();
    const answers = await Promise.all([
      admin.send('PATCH', `/api/people/hospitals/${ids.general}`, { escalationMinutes: 30 }),
      admin.send('PATCH', `/api/people/users/${ids.nurse}`, { name: 'Renamed Elsewhere' }),
      admin.send('POST', `/api/people/users/${ids.nurse}/deactivate`),
      admin.send('PATCH', `/api/people/agencies/${ids.agency}`, { name: 'Taken Over Ambulance' }),
      admin.send('POST', `/api/people/agencies/${ids.agency}/units`, { callSign: 'Intruder 1' }),
      admin.send('PUT', `/api/people/agencies/${ids.agency}/destinations`, { hospitalIds: [foreign.hospitalId] }),
      admin.send('PATCH', `/api/people/units/${ids.unit}`, { active: false }),
      admin.send('POST', '/api/policies', { hospitalId: ids.general, from: 'example' }),
      admin.send('PUT', `/api/policies/${ids.draft}`, { name: 'Hijacked', levels: [], rules: [] }),
      admin.send('DELETE', `/api/policies/${ids.draft}`),
      admin.send('PUT', '/api/review/settings', { hospitalId: ids.general, targetMinutes: 60, compliance: 0.5 }),
      admin.get(`/api/review/cases/${ids.closedCase}`),
    ]);
    expect(answers.map((r) => r.status)).toEqual(Array(12).fill(403));
    expect(await server.db('users').where({ id: ids.nurse }).first()).toEqual(nurseBefore);
    expect((await server.db('units').where({ id: ids.unit }).first('active')).active).toBeTruthy();
    expect(await server.db('policy_versions').where({ id: ids.draft }).first('id')).toEqual({ id: ids.draft });
    // Adding a person to Alderwick is a field of the body that is wrong, so it is a 400 naming it.
    const add = await admin.send('POST', '/api/people/users', { email: 'mole@brackwater.test', name: 'Planted Person', roles: ['charge_nurse'], memberships: [{ kind: 'hospital', id: ids.general }] });
    expect(add.status).toBe(400);
    expect((await add.json()).error.field).toBe('memberships[0]');

    const people = (await (await admin.get('/api/people/users')).json()) as Array<{ email: string }>;
    expect(people.map((p) => p.email).sort()).toEqual(foreignAccounts.map((a) => a.email).sort());
    const hospitals = (await (await admin.get('/api/people/hospitals')).json()) as Array<{ id: number }>;
    expect(hospitals.map((h) => h.id)).toEqual([foreign.hospitalId]);
    const agencies = await (await admin.get('/api/people/agencies')).json();
    expect(agencies.agencies.map((a: { id: number }) => a.id)).toEqual([foreign.agencyId]);
  });

  it('a Brackwater administrator does not read the pages Alderwick sent to its team', async () => {
    const mail = await (await as.admin!.get('/api/mail')).json();
    const before = mail.messages.length;
    const nurse = as.charge_nurse!;
    const summary = (await (await nurse.get(`/api/cases/${ids.liveCase}`)).json()).case;
    const acknowledged = await nurse.send('POST', `/api/cases/${ids.liveCase}/acknowledge`, { rowVersion: summary.rowVersion });
    expect(acknowledged.status).toBe(200);
    const decided = await nurse.send('POST', `/api/cases/${ids.liveCase}/decide`, { rowVersion: (await acknowledged.json()).case.rowVersion, level: summary.recommendedLevel });
    expect(decided.status).toBe(200);
    const paged = await nurse.send('POST', `/api/cases/${ids.liveCase}/page`, { rowVersion: (await decided.json()).case.rowVersion });
    expect(paged.status).toBe(200);
    let messages: unknown[] = [];
    for (let i = 0; i < 50 && messages.length <= before; i++) {
      messages = (await (await as.admin!.get('/api/mail')).json()).messages;
      if (messages.length <= before) await new Promise((r) => setTimeout(r, 100));
    }
    expect(messages.length).toBeGreaterThan(before);
    const theirs = await (await foreignAs.admin!.get('/api/mail')).json();
    expect(theirs.messages).toEqual([]);
  });

  it('a Brackwater paramedic sees no Alderwick destination or case', async () => {
    const crew = foreignAs.paramedic!;
    const destinations = await (await crew.get('/api/crew/destinations')).json();
    expect(destinations.hospitals.map((h: { id: number }) => h.id)).toEqual([foreign.hospitalId]);
    expect(destinations.units.map((u: { id: number }) => u.id)).toEqual([foreign.unitId]);
    expect((await crew.get(`/api/cases/${ids.liveCase}`)).status).toBe(403);
    expect((await (await crew.get('/api/cases?state=all')).json()).cases).toEqual([]);
  });
});

describe('socket commands', () => {
  const COMMANDS = ['case:submit', 'case:update', 'case:cancel', 'case:redirect'] as const;
  let sockets: TestSocket[] = [];
  afterAll(() => sockets.forEach((s) => s.close()));
  const open = async (client: SignedInClient) => {
    const socket = await connectAs(server.url, client);
    sockets.push(socket);
    return socket;
  };

  it('refuses a connection without a session', async () => {
    await expect(connectAs(server.url, null)).rejects.toThrow('unauthenticated');
  });

  it('only a paramedic gets past the role check of each command; every other role is refused', async () => {
    const answers: Array<[Role, string, string]> = [];
    for (const role of ROLES) {
      const socket = await open(as[role]!);
      for (const event of COMMANDS) {
        const ack = await command(socket, event, {});
        answers.push([role, event, ack.ok ? 'ok' : ack.error.code]);
      }
    }
    // The paramedic's empty payload fails on its fields: proof the role check let them through.
    expect(answers).toEqual(ROLES.flatMap((role) => COMMANDS.map((event) => [role, event, role === 'paramedic' ? 'invalid' : 'forbidden'])));
  });

  it('a Brackwater paramedic cannot update, cancel or redirect an Alderwick crew’s case, nor send a pre-alert to Alderwick', async () => {
    const socket = await open(foreignAs.paramedic!);
    const before = await server.db('cases').where({ id: ids.liveCase }).first('row_version', 'state', 'hospital_id', 'current_revision');
    const eventsBefore = await server.db('case_events').where({ case_id: ids.liveCase }).count({ n: '*' }).first();
    const clinical = { ageYears: 40, sex: 'male', fall: { heightM: 4 } };
    const update = await command(socket, 'case:update', { caseId: ids.liveCase, etaMinutes: 5, clinical });
    const cancel = await command(socket, 'case:cancel', { caseId: ids.liveCase, reason: 'Patient refused transport' });
    const redirect = await command(socket, 'case:redirect', { caseId: ids.liveCase, hospitalId: foreign.hospitalId, reason: 'Closer hospital' });
    expect([update, cancel, redirect].map((a) => (a.ok ? 'ok' : a.error.message))).toEqual(Array(3).fill('That case belongs to another ambulance agency.'));
    expect(await server.db('cases').where({ id: ids.liveCase }).first('row_version', 'state', 'hospital_id', 'current_revision')).toEqual(before);
    expect(await server.db('case_events').where({ case_id: ids.liveCase }).count({ n: '*' }).first()).toEqual(eventsBefore);

    const casesBefore = await server.db('cases').count({ n: '*' }).first();
    const toAlderwick = await command(socket, 'case:submit', { clientId: randomUUID(), hospitalId: ids.general, clinical });
    expect(toAlderwick).toMatchObject({ ok: false, error: { code: 'invalid', field: 'hospitalId' } });
    const withTheirUnit = await command(socket, 'case:submit', { clientId: randomUUID(), hospitalId: foreign.hospitalId, unitId: ids.unit, clinical });
    expect(withTheirUnit).toMatchObject({ ok: false, error: { code: 'invalid', field: 'unitId' } });
    // Another agency's pre-alert id sent again: refused, and neither the case nor its id is given away.
    const { client_id: taken } = await server.db('cases').where({ id: ids.liveCase }).first('client_id');
    const reused = await command(socket, 'case:submit', { clientId: taken, hospitalId: foreign.hospitalId, clinical });
    expect(reused).toEqual({ ok: false, error: { code: 'conflict', message: 'That pre-alert id is already in use.' } });
    expect(await server.db('cases').count({ n: '*' }).first()).toEqual(casesBefore);
  });
});

describe('the session cookie', () => {
  const sidOf = async (client: SignedInClient) => {
    const cookie = (await client.jar.getCookies(server.url)).find((c) => c.key === SESSION_COOKIE);
    return cookie ? decodeURIComponent(cookie.value) : undefined;
  };

  it('is replaced at sign-in in the same browser, and the id planted before sign-in is worth nothing after it', async () => {
    const client = browserlessClient(server.url);
    await client.fetch(new URL('/auth/login', server.url), { redirect: 'manual' });
    const planted = await sidOf(client);
    expect(planted).toMatch(/^s:/);
    await signInWith(client, server.url, DEMO_EMAIL.charge_nurse);
    const after = await sidOf(client);
    expect(after).toMatch(/^s:/);
    expect(after).not.toBe(planted);
    expect((await client.get('/api/me')).status).toBe(200);
    const attacker = browserlessClient(server.url);
    attacker.jar.setCookieSync(`${SESSION_COOKIE}=${encodeURIComponent(planted!)}`, server.url);
    expect((await attacker.get('/api/me')).status).toBe(401);
  });

  it('is HttpOnly and SameSite=Lax, and not Secure over plain http', async () => {
    const res = await fetch(new URL('/auth/login', server.url), { redirect: 'manual' });
    const cookie = res.headers.getSetCookie().find((c) => c.startsWith(`${SESSION_COOKIE}=`))!;
    expect(cookie).toMatch(/; HttpOnly/);
    expect(cookie).toMatch(/; SameSite=Lax/);
    expect(cookie).not.toMatch(/; Secure/);
  });

  it('is Secure when the public address is https, behind a proxy that says so', async () => {
    // The https server's own session middleware, given a request the way its proxy forwards it.
    const secure = await startTestServer({ publicUrl: 'https://plumbline.example.test' });
    const probe = express();
    probe.use(secure.deps.sessionMiddleware);
    probe.get('/touch', (req, res) => {
      req.session.returnProbe = true;
      res.end();
    });
    const http = probe.listen(0, '127.0.0.1');
    await new Promise((r) => http.once('listening', r));
    try {
      const base = `http://127.0.0.1:${(http.address() as AddressInfo).port}`;
      const proxied = await fetch(`${base}/touch`, { headers: { 'x-forwarded-proto': 'https' } });
      const cookie = proxied.headers.getSetCookie().find((c) => c.startsWith(`${SESSION_COOKIE}=`))!;
      expect(cookie).toMatch(/; Secure/);
      expect(cookie).toMatch(/; HttpOnly/);
      expect(cookie).toMatch(/; SameSite=Lax/);
      // Without the proxy's word the connection is plain http, and a Secure cookie is not sent at all.
      const direct = await fetch(`${base}/touch`);
      expect(direct.headers.getSetCookie().filter((c) => c.startsWith(`${SESSION_COOKIE}=`))).toEqual([]);
    } finally {
      http.close();
      await secure.close();
    }
  });
});

describe('insiders on Alderwick’s own side', () => {
  // Alderwick's own people, each acting within their role but beyond what it should give them: a
  // hospital's administrator on the county's administrator, anyone on their own access, and the
  // author of a policy on its approval.
  const PASSWORD = 'a-long-test-password';
  let community: number;
  let countyAdminId: number;
  let narrow: SignedInClient;
  let narrowId: number;

  const addPerson = async (email: string, roles: Role[], memberships: Array<{ kind: 'hospital' | 'agency'; id: number }>) => {
    const created = await as.admin!.send('POST', '/api/people/users', { email, name: email.split('@')[0], roles, memberships });
    expect(created.status).toBe(201);
    const id = (await created.json()).id as number;
    expect((await as.admin!.send('POST', `/api/people/users/${id}/password`, { password: PASSWORD })).status).toBe(200);
    return { id, client: await signIn(server.url, email, PASSWORD) };
  };

  beforeAll(async () => {
    community = (await server.db('hospitals').where({ short_name: 'Fenmoor Community' }).first('id')).id;
    countyAdminId = (await server.db('users').where({ email: DEMO_EMAIL.admin }).first('id')).id;
    ({ id: narrowId, client: narrow } = await addPerson('fenmoor.admin@plumbline.test', ['admin'], [{ kind: 'hospital', id: community }]));
  });

  it('a Fenmoor-only administrator cannot reset, re-address, rename or deactivate the county administrator, who works at Fenmoor too', async () => {
    const before = await server.db('users').where({ id: countyAdminId }).first();
    const answers = await Promise.all([
      narrow.send('POST', `/api/people/users/${countyAdminId}/password`, { password: 'taken-over-password' }),
      narrow.send('PATCH', `/api/people/users/${countyAdminId}`, { email: 'attacker@plumbline.test' }),
      narrow.send('PATCH', `/api/people/users/${countyAdminId}`, { name: 'Locked Out' }),
      narrow.send('PATCH', `/api/people/users/${countyAdminId}`, { roles: ['quality'] }),
      narrow.send('POST', `/api/people/users/${countyAdminId}/deactivate`),
    ]);
    expect(answers.map((r) => r.status)).toEqual(Array(5).fill(403));
    expect((await answers[0].json()).error.message).toBe('That person also works for a hospital or agency you do not manage; an administrator of all their places must make this change.');
    expect(await server.db('users').where({ id: countyAdminId }).first()).toEqual(before);
    expect((await (await signIn(server.url, DEMO_EMAIL.admin)).get('/api/me')).status).toBe(200);
    // Someone wholly inside Fenmoor is theirs to manage.
    const fenmoorNurse = (await server.db('users').where({ email: 'fenmoor.nurse@plumbline.test' }).first('id')).id;
    const renamed = await narrow.send('PATCH', `/api/people/users/${fenmoorNurse}`, { name: 'Ilse Brannagh-Ode' });
    expect(renamed.status).toBe(200);
  });

  it('nobody changes their own roles or places, while their name is still theirs to change', async () => {
    const rolesBefore = await server.db('user_roles').where({ user_id: narrowId }).pluck('role');
    const placesBefore = await server.db('memberships').where({ user_id: narrowId }).select('hospital_id', 'agency_id');
    const grant = await narrow.send('PATCH', `/api/people/users/${narrowId}`, { roles: ['admin', 'trauma_lead'] });
    expect(grant.status).toBe(403);
    expect((await grant.json()).error.message).toBe('You cannot change your own roles; ask another administrator.');
    // The county administrator may not widen or narrow their own places either.
    const me = await (await as.admin!.get('/api/me')).json();
    const fewer = me.memberships.slice(1).map((m: { kind: string; id: number }) => ({ kind: m.kind, id: m.id }));
    const narrowed = await as.admin!.send('PATCH', `/api/people/users/${countyAdminId}`, { memberships: fewer });
    expect(narrowed.status).toBe(403);
    expect((await narrowed.json()).error.message).toBe('You cannot change your own hospitals or agencies; ask another administrator.');
    expect((await as.admin!.send('PATCH', `/api/people/users/${countyAdminId}`, { roles: ['admin', 'trauma_lead'] })).status).toBe(403);
    expect(await server.db('user_roles').where({ user_id: narrowId }).pluck('role')).toEqual(rolesBefore);
    expect(await server.db('memberships').where({ user_id: narrowId }).select('hospital_id', 'agency_id')).toEqual(placesBefore);
    // The whole form sent back unchanged, with a new name, is not a change of access.
    const same = await narrow.send('PATCH', `/api/people/users/${narrowId}`, { name: 'Fenmoor Administrator', roles: ['admin'], memberships: [{ kind: 'hospital', id: community }] });
    expect(same.status).toBe(200);
  });

  it('the author of a draft, or the last to change it, cannot approve it; another trauma lead can', async () => {
    const { client: author } = await addPerson('fenmoor.lead.admin@plumbline.test', ['admin', 'trauma_lead'], [{ kind: 'hospital', id: community }]);
    const drafted = await author.send('POST', '/api/policies', { hospitalId: community, from: 'example' });
    expect(drafted.status).toBe(201);
    const draft = await drafted.json();
    const own = await author.send('POST', `/api/policies/${draft.id}/approve`);
    expect(own.status).toBe(403);
    expect((await own.json()).error.message).toBe('You drafted or last changed this version; another trauma lead must approve it.');
    expect((await server.db('policy_versions').where({ id: draft.id }).first('status')).status).toBe('draft');

    // A second trauma lead who is also an administrator edits it: now they are the last to change it.
    const { client: editor } = await addPerson('fenmoor.editor@plumbline.test', ['admin', 'trauma_lead'], [{ kind: 'hospital', id: community }]);
    const { name, note, levels, rules } = draft.document;
    expect((await editor.send('PUT', `/api/policies/${draft.id}`, { name: `${name} (checked)`, note, levels, rules })).status).toBe(200);
    expect((await editor.send('POST', `/api/policies/${draft.id}/approve`)).status).toBe(403);
    expect((await author.send('POST', `/api/policies/${draft.id}/approve`)).status).toBe(403);

    const { client: reviewer } = await addPerson('fenmoor.lead@plumbline.test', ['trauma_lead'], [{ kind: 'hospital', id: community }]);
    const approved = await reviewer.send('POST', `/api/policies/${draft.id}/approve`);
    expect(approved.status).toBe(200);
    expect((await approved.json()).approvedByName).toBe('fenmoor.lead');
  });
});

declare module 'express-session' {
  interface SessionData { returnProbe?: boolean }
}
