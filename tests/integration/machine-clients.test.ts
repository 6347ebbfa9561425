// A record or dispatch system sends pre-alerts as an OAuth 2.0 machine client: registered by an
// administrator for one agency, a client-credentials token from the built-in identity provider,
// then the crew's own path (schema, evaluation, idempotency by the sender's id).
import { randomUUID } from 'node:crypto';
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { SignJWT, importJWK, decodeJwt } from 'jose';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { loadConfig } from '../../server/config';
import { startServer, type RunningServer } from '../../server/server';
import { verifyAuditChain } from '../../server/services/audit/audit';
import type { CaseSummary } from '../../shared/schemas/cases';
import { signIn, type SignedInClient } from '../support/sign-in';
import { command, connectAs, nextEvent, type TestSocket } from '../support/socket';

// Check values: 2021 field-triage guideline (Newgard CD et al., 2022) [source] for the field risk;
// the shipped example policy [ours] for the activation level.

let dataDir: string;
let server: RunningServer;
let admin: SignedInClient;
let board: TestSocket;
let crew: TestSocket;
let general: number;
let agencyId: number;

interface Issued { client: { id: number; clientId: string; name: string }; clientSecret: string; tokenEndpoint: string }

const start = () => startServer(loadConfig({ NODE_ENV: 'test' }, { port: 0, host: '127.0.0.1', dataDir, logLevel: 'silent' }), { backgroundJobs: false });

async function register(name: string, requestsPerMinute = 60, on = admin): Promise<Issued> {
  const answer = await on.send('POST', '/api/people/machine-clients', { name, agencyId, requestsPerMinute });
  expect(answer.status).toBe(201);
  return answer.json();
}

async function tokenFor(issued: Pick<Issued, 'client' | 'clientSecret' | 'tokenEndpoint'>, extra: Record<string, string> = {}): Promise<Response> {
  return fetch(issued.tokenEndpoint, {
    method: 'POST',
    headers: { authorization: `Basic ${Buffer.from(`${issued.client.clientId}:${issued.clientSecret}`).toString('base64')}`, 'content-type': 'application/x-www-form-urlencoded' },
    body: new URLSearchParams({ grant_type: 'client_credentials', ...extra }),
  });
}

async function accessToken(issued: Issued): Promise<string> {
  const answer = await tokenFor(issued);
  expect(answer.status).toBe(200);
  return (await answer.json()).access_token;
}

/** As a machine client sends: a bearer token and no Origin header, no cookie. */
const post = (token: string, body: unknown, type = 'application/json') =>
  fetch(new URL('/api/pre-alerts', server.url), { method: 'POST', headers: { authorization: `Bearer ${token}`, 'content-type': type, accept: 'application/json' }, body: typeof body === 'string' ? body : JSON.stringify(body) });

const preAlert = (over: Record<string, unknown> = {}) => ({
  clientId: randomUUID(),
  hospitalId: general,
  etaMinutes: 12,
  // 34-year-old, fell 4 m (13.1 ft) onto concrete, SBP 120: moderate (fall > 10 ft) [source: Newgard 2022] → consult [ours].
  clinical: { ageYears: 34, sex: 'male', fall: { heightM: 4, surface: 'concrete', firstImpact: 'lower-limb-feet', headImpact: false }, vitals: { sbp: 120, hr: 88, rr: 18 } },
  ...over,
});
const casesWith = async (clientId: string) => Number((await server.db('cases').where({ client_id: clientId }).count({ n: '*' }).first())!.n);
const countCases = async () => Number((await server.db('cases').count({ n: '*' }).first())!.n);

/** A token signed with the identity provider's own key but with claims of our choosing: only the claims can make it wrong. */
async function forged(claims: Record<string, unknown>): Promise<string> {
  const { keys } = JSON.parse(readFileSync(join(dataDir, 'idp-signing-key.json'), 'utf8'));
  const key = await importJWK(keys[0], 'RS256');
  return new SignJWT(claims).setProtectedHeader({ alg: 'RS256', kid: keys[0].kid, typ: 'at+jwt' }).sign(key);
}

beforeAll(async () => {
  dataDir = mkdtempSync(join(tmpdir(), 'plumbline-machine-'));
  server = await start();
  general = (await server.db('hospitals').where({ name: 'Alderwick General Hospital' }).first('id')).id;
  agencyId = (await server.db('agencies').where({ name: 'Alderwick County Ambulance Service' }).first('id')).id;
  admin = await signIn(server.url, 'admin@plumbline.test');
  board = await connectAs(server.url, await signIn(server.url, 'nurse@plumbline.test'));
  crew = await connectAs(server.url, await signIn(server.url, 'paramedic@plumbline.test'));
});

afterAll(async () => {
  board?.close();
  crew?.close();
  await server?.close();
  rmSync(dataDir, { recursive: true, force: true });
});

describe('machine clients sending pre-alerts', () => {
  let sender: Issued;
  let token: string;

  beforeAll(async () => {
    sender = await register('Alderwick care-record system');
    token = await accessToken(sender);
  });

  it('issues a short-lived JWT access token for this API only', () => {
    const claims = decodeJwt(token);
    expect(claims.aud).toBe(`${server.url}/api`);
    expect(claims.client_id).toBe(sender.client.clientId);
    expect(claims.iss).toBe(`${server.url}/idp`);
    expect(Number(claims.exp) - Number(claims.iat)).toBe(600);
  });

  it('posts the same pre-alert twice and finds one case, shown on the board with its source', async () => {
    const payload = preAlert();
    const heard = nextEvent<[CaseSummary]>(board, 'case:submitted');
    const first = await post(token, payload);
    expect(first.status).toBe(201);
    const made = await first.json();
    expect(made).toMatchObject({ created: true, fieldRisk: 'moderate', recommendedLevel: 'consult' });
    expect(made.criteria).toEqual(['field-2021:fall-above-10-ft']);
    const [onBoard] = await heard;
    expect(onBoard.id).toBe(made.caseId);
    expect(onBoard.source).toBe('Alderwick care-record system');

    const again = await post(token, payload);
    expect(again.status).toBe(200);
    expect(await again.json()).toMatchObject({ caseId: made.caseId, created: false });
    expect(await casesWith(payload.clientId)).toBe(1);

    // Its own audit actor: the client's account, in the machine-client role.
    const received = await server.db('audit_log').where({ case_id: made.caseId, action: 'case.received' }).first();
    const account = await server.db('machine_clients').where({ client_id: sender.client.clientId }).first('user_id');
    expect(received).toMatchObject({ actor_id: account.user_id, actor_role: 'machine_client' });
    expect((await verifyAuditChain(server.db)).ok).toBe(true);
  });

  it('posts a FHIR Bundle and finds it evaluated as the crew screen evaluates the same patient', async () => {
    // 70-year-old on an anticoagulant, ground-level fall with head impact, SBP 104, GCS 14:
    // high risk (age ≥ 65 and SBP < 110) and moderate criteria [source: Newgard 2022].
    const clinical = { ageYears: 70, sex: 'female', anticoagulant: true, fall: { heightM: 0, surface: 'tile-stone', firstImpact: 'head', headImpact: true }, vitals: { sbp: 104, hr: 96, rr: 20, spo2: 95, spo2RoomAir: true, gcs: { eye: 4, verbal: 4, motor: 6 } }, findings: ['skull-deformity'] };
    const byCrew = await command<{ caseId: number; summary: CaseSummary }>(crew, 'case:submit', preAlert({ clinical }));
    if (!byCrew.ok) throw new Error(byCrew.error.message);
    const bundle = await (await admin.get(`/api/cases/${byCrew.data.caseId}/fhir`)).json();
    bundle.identifier.value = randomUUID();

    const answer = await post(token, JSON.stringify(bundle), 'application/fhir+json');
    expect(answer.status).toBe(201);
    const made = await answer.json();
    const crewResult = byCrew.data.summary.latest.result;
    expect(made.fieldRisk).toBe(crewResult.fieldRisk);
    expect(made.recommendedLevel).toBe(crewResult.activation);
    expect(made.criteria).toEqual(crewResult.criteria.map((c) => c.id));
    expect(made.criteria.length).toBeGreaterThan(2);
    const stored = await (await admin.get(`/api/cases/${made.caseId}`)).json();
    expect(stored.case.latest.input).toEqual(byCrew.data.summary.latest.input);
    expect(stored.case.source).toBe('Alderwick care-record system');
  });

  it("accepts the README's examples as written, one per format", async () => {
    const readme = readFileSync(new URL('../../README.md', import.meta.url), 'utf8');
    const examples = [...readme.matchAll(/-H 'Content-Type: ([^']+)' http:\/\/localhost:3000\/api\/pre-alerts -d '([^']+)'/g)];
    expect(examples.map((m) => m[1])).toEqual(['application/json', 'application/fhir+json']);
    expect(general).toBe(1); // the examples name hospital 1, Alderwick General in the demo scenario
    const [native, bundle] = await Promise.all(examples.map(async ([, type, body]) => (await post(token, body, type)).json()));
    // 34-year-old, 4 m fall: moderate → consult; 70-year-old, SBP 104, fall from standing with head
    // impact: high (SBP < 110 at 65 or older) → limited [source: Newgard 2022; levels: the shipped example policy, ours].
    expect([native.fieldRisk, native.recommendedLevel]).toEqual(['moderate', 'consult']);
    expect([bundle.fieldRisk, bundle.recommendedLevel]).toEqual(['high', 'limited']);
  });

  it('refuses bad input with a 4xx naming the field, and stores nothing', async () => {
    const before = await countCases();
    const tooHigh = await post(token, preAlert({ clinical: { ageYears: 40, fall: { heightM: 3 }, vitals: { sbp: 900 } } }));
    expect(tooHigh.status).toBe(400);
    expect((await tooHigh.json()).error.field).toBe('clinical.vitals.sbp');

    const elsewhere = await post(token, preAlert({ hospitalId: 999_999 }));
    expect(elsewhere.status).toBe(400);
    expect((await elsewhere.json()).error.field).toBe('hospitalId');

    const bundle = await (await admin.get(`/api/cases/${(await server.db('cases').first('id')).id}/fhir`)).json();
    bundle.identifier.value = randomUUID();
    bundle.entry.push({ resource: { resourceType: 'Observation', status: 'final', code: { coding: [{ system: 'http://loinc.org', code: '0000-0' }] } } });
    const unknown = await post(token, bundle, 'application/fhir+json');
    expect(unknown.status).toBe(400);
    expect((await unknown.json()).error.field).toBe(`entry[${bundle.entry.length - 1}].resource.code`);

    const notJson = await post(token, '{"clientId":');
    expect(notJson.status).toBe(400);
    expect(await countCases()).toBe(before);
  });

  it('refuses a missing, garbled, expired, other-audience or other-issuer token', async () => {
    const now = Math.floor(Date.now() / 1000);
    const good = { iss: `${server.url}/idp`, aud: `${server.url}/api`, client_id: sender.client.clientId, sub: sender.client.clientId, iat: now, exp: now + 600, jti: randomUUID() };
    const before = await countCases();
    const none = await fetch(new URL('/api/pre-alerts', server.url), { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify(preAlert()) });
    expect(none.status).toBe(401);
    expect(none.headers.get('www-authenticate')).toBe('Bearer realm="plumbline"');
    // A signed-in person's session is no substitute for a machine client's token.
    const person = await admin.send('POST', '/api/pre-alerts', preAlert());
    expect(person.status).toBe(401);
    const refusals = [
      ['garbled', 'not.a.token'],
      ['expired', await forged({ ...good, iat: now - 1200, exp: now - 600 })],
      ['other audience', await forged({ ...good, aud: 'https://records.example.test/api' })],
      ['other issuer', await forged({ ...good, iss: 'https://idp.example.test' })],
      ['unregistered client', await forged({ ...good, client_id: 'plumbline-mc-nobody' })],
    ] as const;
    for (const [why, bad] of refusals) {
      const answer = await post(bad, preAlert());
      expect(answer.status, why).toBe(401);
      expect((await answer.json()).error.code, why).toBe('invalid_token');
    }
    // The identity provider issues tokens for this API only.
    const elsewhere = await tokenFor(sender, { resource: 'https://records.example.test/api' });
    expect(elsewhere.status).toBe(400);
    expect((await elsewhere.json()).error).toBe('invalid_target');
    // The same claims, well signed, pass: the refusals above are the claims', not the signature's.
    expect((await post(await forged(good), preAlert())).status).toBe(201);
    expect(await countCases()).toBe(before + 1);
  });

  it("keeps each client to its own request budget", async () => {
    const slow = await register('Alderwick dispatch', 3);
    const slowToken = await accessToken(slow);
    const answers = [];
    for (let i = 0; i < 4; i++) answers.push((await post(slowToken, preAlert())).status);
    expect(answers).toEqual([201, 201, 201, 429]);
    // Another client is not held back by this one.
    expect((await post(token, preAlert())).status).toBe(201);
  });

  it('lets only an administrator of the agency register, and revocation stops tokens in hand and new ones', async () => {
    const nurse = await signIn(server.url, 'nurse@plumbline.test');
    expect((await nurse.send('POST', '/api/people/machine-clients', { name: 'Not mine', agencyId, requestsPerMinute: 5 })).status).toBe(403);
    // An administrator only of other places cannot register for an agency that is not theirs.
    const [foreign] = await server.db('agencies').insert({ name: 'Harrowgate Valley Ambulance Trust', created_at: Date.now() }).returning('id');
    const notTheirs = await admin.send('POST', '/api/people/machine-clients', { name: 'Valley records', agencyId: foreign.id });
    expect(notTheirs.status).toBe(400);
    expect((await notTheirs.json()).error.field).toBe('agencyId');
    const bad = await admin.send('POST', '/api/people/machine-clients', { name: 'X', agencyId });
    expect(bad.status).toBe(400);
    expect((await bad.json()).error.field).toBe('name');

    const doomed = await register('Retired record system');
    const held = await accessToken(doomed);
    expect((await admin.send('POST', `/api/people/machine-clients/${doomed.client.id}/revoke`, {})).status).toBe(200);
    expect((await post(held, preAlert())).status).toBe(401);
    expect((await tokenFor(doomed)).status).toBe(401);
    const listed = await (await admin.get('/api/people/machine-clients')).json();
    expect(listed.clients.find((c: { id: number }) => c.id === doomed.client.id).active).toBe(false);
    // A client's secret is never listed.
    expect(JSON.stringify(listed)).not.toContain(doomed.clientSecret);
  });

  it('keeps registered clients across a restart', async () => {
    await server.close();
    server = await start();
    const restarted = { ...sender, tokenEndpoint: `${server.url}/idp/token` };
    const answer = await tokenFor(restarted);
    expect(answer.status).toBe(200);
    const fresh = (await answer.json()).access_token;
    expect((await post(fresh, preAlert())).status).toBe(201);
  });
});
