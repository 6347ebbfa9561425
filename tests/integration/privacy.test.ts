import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { CaseEventView, CaseSummary } from '../../shared/schemas/cases';
import { startTestServer, type TestServer } from '../support/server';
import { browserlessClient, signIn, signInWith, type SignedInClient } from '../support/sign-in';
import { command, connectAs, nextEvent, type TestSocket } from '../support/socket';

// What each reader gets to see: a crew sees its case without what the hospital wrote about it,
// no answer with patient data is kept by a browser, the audit chain's counts are the reader's own,
// and the built-in identity provider offers only the code flow.

// A fall from 9 m, SBP 80: SBP < 90 at age 10–64 is high risk in the 2021 guideline
// [source: Newgard 2022], full under the example policy, so a lower level needs a reason.
const clinical = { ageYears: 34, sex: 'male', fall: { heightM: 9, surface: 'concrete' }, vitals: { sbp: 80, hr: 120 } };
const NURSE_REASON = 'Walking and talking at the door; senior review instead';

let server: TestServer;
let crew: SignedInClient;
let nurse: SignedInClient;
let ids: { general: number; community: number };
const sockets: TestSocket[] = [];

beforeAll(async () => {
  server = await startTestServer();
  const db = server.db;
  ids = {
    general: (await db('hospitals').where({ short_name: 'Alderwick General' }).first('id')).id,
    community: (await db('hospitals').where({ short_name: 'Fenmoor Community' }).first('id')).id,
  };
  [crew, nurse] = await Promise.all([signIn(server.url, 'paramedic@plumbline.test'), signIn(server.url, 'nurse@plumbline.test')]);
}, 60_000);
afterAll(async () => {
  sockets.forEach((s) => s.close());
  await server?.close();
});

describe('a crew’s read of its case', () => {
  it('shows the clinical content, acknowledgement, decided level and bay, and none of the nurse’s reason, pages or reviews', async () => {
    const crewSocket = await connectAs(server.url, crew);
    sockets.push(crewSocket);
    const sent = await command<{ caseId: number }>(crewSocket, 'case:submit', { clientId: randomUUID(), hospitalId: ids.general, etaMinutes: 9, notes: 'Fell from scaffolding', clinical });
    if (!sent.ok) throw new Error(sent.error.message);
    const caseId = sent.data.caseId;
    let row = (await (await nurse.get(`/api/cases/${caseId}`)).json()).case as CaseSummary;
    const act = async (action: string, body: Record<string, unknown>) => {
      const res = await nurse.send('POST', `/api/cases/${caseId}/${action}`, { rowVersion: row.rowVersion, ...body });
      expect(res.status, action).toBe(200);
      row = (await res.json()).case;
    };
    await act('acknowledge', {});
    const crewHears = nextEvent<[CaseSummary]>(crewSocket, 'case:updated', 3000, (s) => s.id === caseId && s.decidedLevel === 'limited');
    await act('decide', { level: 'limited', reason: NURSE_REASON });
    await act('bay', { bay: 'Resus 4' });
    await act('page', {});
    const lead = await signIn(server.url, 'lead@plumbline.test');
    await act('arrived', {});
    await act('close', {});
    expect((await lead.send('POST', `/api/review/cases/${caseId}/flag`, { comment: 'Under-triage? Discuss at peer review' })).status).toBe(201);

    // The hospital's own read holds all of it.
    const full = await (await nurse.get(`/api/cases/${caseId}`)).json();
    expect(full.case.decidedReason).toBe(NURSE_REASON);
    expect(full.events.map((e: CaseEventView) => e.kind)).toEqual(expect.arrayContaining(['paged', 'level-decided']));

    const read = await (await crew.get(`/api/cases/${caseId}`)).json();
    expect(read.case).toMatchObject({ id: caseId, acknowledgedAt: expect.any(Number), decidedLevel: 'limited', bay: 'Resus 4', decidedReason: null });
    expect(read.case.latest.input).toMatchObject({ ageYears: 34, vitals: { sbp: 80 } });
    expect(read.case.latest.notes).toBe('Fell from scaffolding');
    expect(read.revisions).toHaveLength(1);
    const kinds = read.events.map((e: CaseEventView) => e.kind);
    expect(kinds).toEqual(['received', 'acknowledged', 'level-decided', 'bay-assigned', 'arrived', 'closed']);
    expect(read.events.every((e: CaseEventView) => e.data === null)).toBe(true);
    const text = JSON.stringify(read);
    for (const secret of [NURSE_REASON, 'Under-triage?', 'trauma-full@', 'trauma-limited@']) expect(text).not.toContain(secret);

    const listed = (await (await crew.get('/api/cases?state=all')).json()).cases as CaseSummary[];
    expect(listed.find((c) => c.id === caseId)).toMatchObject({ decidedLevel: 'limited', decidedReason: null });
    expect(JSON.stringify(listed)).not.toContain(NURSE_REASON);
    const [pushed] = await crewHears;
    expect(pushed.decidedReason).toBeNull();
  });
});

describe('caching', () => {
  it('every API answer with patient data says Cache-Control: no-store', async () => {
    const lead = await signIn(server.url, 'lead@plumbline.test');
    const quality = await signIn(server.url, 'quality@plumbline.test');
    const caseId = (await server.db('cases').where({ hospital_id: ids.general }).first('id')).id;
    const answers = await Promise.all([
      crew.get('/api/cases'),
      nurse.get(`/api/cases/${caseId}`),
      nurse.get(`/api/board?hospitalId=${ids.general}`),
      lead.get(`/api/review/cases?hospitalId=${ids.general}`),
      lead.get(`/api/review/cases/${caseId}`),
      lead.get(`/api/review/cases.csv?hospitalId=${ids.general}`),
      quality.get(`/api/quality/report?hospitalId=${ids.general}&from=2026-01-01&to=2026-12-31`),
      quality.get(`/api/quality/cases?hospitalId=${ids.general}&from=2026-01-01&to=2026-12-31`),
      nurse.get('/api/me'),
      nurse.get('/api/cases/999999'),
    ]);
    expect(answers.map((r) => r.status)).toEqual([200, 200, 200, 200, 200, 200, 200, 200, 200, 404]);
    expect(answers.map((r) => r.headers.get('cache-control'))).toEqual(Array(answers.length).fill('no-store'));
  });
});

describe('the audit chain’s status', () => {
  it('counts for each reader only the rows about their own hospitals', async () => {
    const total = Number((await server.db('audit_log').count({ n: '*' }).first())!.n);
    const ofGeneral = Number(
      (await server.db('audit_log')
        .whereIn('case_id', server.db('cases').where({ hospital_id: ids.general }).select('id'))
        .orWhere((w) => w.where({ entity: 'hospital', entity_id: String(ids.general) }))
        .orWhere((w) => w.where({ entity: 'policy' }).whereIn('entity_id', server.db('policy_versions').where({ hospital_id: ids.general }).select(server.db.raw('CAST(id AS TEXT)'))))
        .count({ n: '*' })
        .first())!.n,
    );
    const lead = await signIn(server.url, 'lead@plumbline.test');
    const status = await (await lead.get('/api/review/audit-chain')).json();
    expect(status).toMatchObject({ ok: true, rows: ofGeneral });
    expect(ofGeneral).toBeGreaterThan(0);
    expect(ofGeneral).toBeLessThan(total);
  });
});

describe('the built-in identity provider', () => {
  it('offers only the authorization-code flow with PKCE: no implicit or hybrid response types', async () => {
    const doc = await (await fetch(`${server.url}/idp/.well-known/openid-configuration`)).json();
    expect(doc.response_types_supported).toEqual(['code']);
    expect(doc.grant_types_supported).not.toContain('implicit');
    expect(doc.code_challenge_methods_supported).toEqual(['S256']);
    // An implicit request is refused outright.
    const implicit = await fetch(`${server.url}/idp/auth?client_id=plumbline-web&response_type=id_token&scope=openid&nonce=n&redirect_uri=${encodeURIComponent(`${server.url}/auth/callback`)}`, { redirect: 'manual' });
    const landed = implicit.headers.get('location') ?? '';
    expect(implicit.status === 400 || /error=unsupported_response_type/.test(landed)).toBe(true);
  });

  it('issues short-lived tokens', async () => {
    const rows = await server.db('identity_store').whereIn('model', ['AccessToken', 'AuthorizationCode']).select('model', 'payload', 'expires_at');
    for (const row of rows) {
      const payload = JSON.parse(row.payload);
      expect(payload.exp - payload.iat, row.model).toBeLessThanOrEqual(row.model === 'AuthorizationCode' ? 60 : 300);
    }
    expect(rows.length).toBeGreaterThan(0);
  });

  it('sends HSTS on its pages and the API when the public address is https', async () => {
    const secure = await startTestServer({ publicUrl: `https://plumbline.example.test` });
    try {
      const base = `http://127.0.0.1:${secure.port}`;
      for (const path of ['/api/health', '/idp/.well-known/openid-configuration', '/auth/login']) {
        const res = await fetch(`${base}${path}`, { redirect: 'manual', headers: { 'x-forwarded-proto': 'https' } });
        expect(res.headers.get('strict-transport-security'), path).toMatch(/^max-age=\d{7,}/);
      }
      const plain = await fetch(`${server.url}/api/health`);
      expect(plain.headers.get('strict-transport-security')).toBeNull();
    } finally {
      await secure.close();
    }
  });

  it('ends a deactivated person’s session there too: signing in again asks for the password, and then refuses', async () => {
    const admin = await signIn(server.url, 'admin@plumbline.test');
    const created = await admin.send('POST', '/api/people/users', { email: 'leaving@plumbline.test', name: 'Leaving Soon', roles: ['charge_nurse'], memberships: [{ kind: 'hospital', id: ids.community }] });
    const id = (await created.json()).id as number;
    await admin.send('POST', `/api/people/users/${id}/password`, { password: 'a-long-test-password' });
    const leaving = await signIn(server.url, 'leaving@plumbline.test', 'a-long-test-password');
    expect((await admin.send('POST', `/api/people/users/${id}/deactivate`)).status).toBe(200);
    const again = await leaving.fetch(new URL('/auth/login', server.url));
    expect(again.status).toBe(200);
    expect(again.url).toMatch(/\/idp\/interaction\//);
    expect(await again.text()).toContain('<label for="password">Password</label>');
  });

  it('gives a deactivated person whose session there is still live a clear page, not a server error', async () => {
    const admin = await signIn(server.url, 'admin@plumbline.test');
    const created = await admin.send('POST', '/api/people/users', { email: 'stale@plumbline.test', name: 'Stale Session', roles: ['charge_nurse'], memberships: [{ kind: 'hospital', id: ids.community }] });
    const id = (await created.json()).id as number;
    await admin.send('POST', `/api/people/users/${id}/password`, { password: 'a-long-test-password' });
    const stale = await signIn(server.url, 'stale@plumbline.test', 'a-long-test-password');
    // Turned off behind the application's back (a script, a restore): the provider's session lives on.
    await server.db('users').where({ id }).update({ active: false });
    const res = await stale.fetch(new URL('/auth/login', server.url));
    // Back at the password page; the right password is then refused as for any inactive account.
    expect(res.status).toBe(200);
    expect(res.url).toMatch(/\/idp\/interaction\//);
    expect(await res.text()).toContain('<label for="password">Password</label>');
    await expect(signInWith(stale, server.url, 'stale@plumbline.test', 'a-long-test-password')).rejects.toThrow(/HTTP 401/);
  });
});

describe('a malformed Referer', () => {
  it('on a state-changing request is refused as from another site, not a server error', async () => {
    const res = await nurse.fetch(new URL('/api/cases/1/acknowledge', server.url), { method: 'POST', headers: { 'content-type': 'application/json', referer: 'http://[::1' }, body: '{}' });
    expect(res.status).toBe(403);
    expect((await res.json()).error.code).toBe('cross_site');
    const anonymous = await browserlessClient(server.url).fetch(new URL('/auth/logout', server.url), { method: 'POST', headers: { referer: '::not a url::' } });
    expect(anonymous.status).toBe(403);
  });
});
