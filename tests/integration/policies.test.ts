import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startTestServer, type TestServer } from '../support/server';
import { browserlessClient, signIn, type SignedInClient } from '../support/sign-in';
import { command, connectAs } from '../support/socket';
import { policyInForce } from '../../server/services/policies/policies';
import { EXAMPLE_POLICY, type Policy } from '../../shared/triage/policy';

// The activation policy's life: drafted by an administrator, approved by the hospital's trauma
// lead, published with a date; what was evaluated before keeps the version it was evaluated under.

let server: TestServer;
let admin: SignedInClient;
let lead: SignedInClient;
let nurse: SignedInClient;
let paramedic: SignedInClient;
let general: number;
let community: number;

/** 72-year-old, fall from standing, no head strike, on an anticoagulant: 2021 moderate risk. */
const anticoagulatedFall = {
  ageYears: 72, sex: 'female', anticoagulant: true, pregnancyWeeks: null,
  fall: { heightM: 0, surface: 'tile-stone', firstImpact: 'side', headImpact: false },
  vitals: { sbp: 140, hr: 80, rr: 16, spo2: 97, spo2RoomAir: true, gcs: { eye: 4, verbal: 5, motor: 6 } },
  findings: [], considerations: [],
};

async function submit(hospitalId: number) {
  const socket = await connectAs(server.url, paramedic);
  try {
    const answer = await command<{ caseId: number; summary: { policy: { id: string; version: number; example: boolean }; recommendedLevel: string } }>(socket, 'case:submit', { clientId: randomUUID(), hospitalId, clinical: anticoagulatedFall });
    if (!answer.ok) throw new Error(`submit refused: ${answer.error.message}`);
    return answer.data;
  } finally {
    socket.close();
  }
}

/** The example with anticoagulant use moved from a trauma consult up to the limited team. */
function stricter(doc: Policy) {
  const levels = doc.levels.map((l) => (l.id === 'limited' ? { ...l, name: 'Trauma team, limited' } : l));
  const rules = doc.rules.map((rule) =>
    rule.level === 'limited' ? { ...rule, criteria: [...rule.criteria, 'field-2021:anticoagulant'] }
      : rule.level === 'consult' ? { ...rule, criteria: rule.criteria.filter((id) => id !== 'field-2021:anticoagulant') }
        : rule,
  );
  return { name: doc.name, note: doc.note, levels, rules };
}

const auditOf = (entityId: number) => server.db('audit_log').where({ entity: 'policy', entity_id: String(entityId) }).orderBy('id').select('action', 'actor_role', 'policy_id', 'policy_version');

beforeAll(async () => {
  server = await startTestServer();
  [admin, lead, nurse, paramedic] = await Promise.all(['admin', 'lead', 'nurse', 'paramedic'].map((who) => signIn(server.url, `${who}@plumbline.test`)));
  const hospitals = await server.db('hospitals').orderBy('id').select('id', 'short_name');
  general = hospitals.find((h) => h.short_name === 'Alderwick General').id;
  community = hospitals.find((h) => h.short_name === 'Fenmoor Community').id;
});
afterAll(() => server?.close());

describe('who may do what with policies', () => {
  it('answers 401 without a session', async () => {
    const anonymous = browserlessClient(server.url);
    expect((await anonymous.get(`/api/policies?hospitalId=${general}`)).status).toBe(401);
    expect((await anonymous.send('POST', '/api/policies', { hospitalId: general })).status).toBe(401);
  });

  it('refuses a charge nurse (403) and lets the trauma lead and admin read (200)', async () => {
    expect((await nurse.get(`/api/policies?hospitalId=${general}`)).status).toBe(403);
    expect((await lead.get(`/api/policies?hospitalId=${general}`)).status).toBe(200);
    expect((await admin.get(`/api/policies?hospitalId=${general}`)).status).toBe(200);
  });

  it("refuses a trauma lead another hospital's policies", async () => {
    const res = await lead.get(`/api/policies?hospitalId=${community}`);
    expect(res.status).toBe(403);
    expect((await res.json()).error.message).toBe('That hospital is not one of yours.');
  });

  it('lets only an administrator draft', async () => {
    const res = await lead.send('POST', '/api/policies', { hospitalId: general, from: 'example' });
    expect(res.status).toBe(403);
    expect((await res.json()).error.message).toBe('This needs one of these roles: admin.');
  });

  it("refuses an administrator a hospital they are not a member of", async () => {
    const [outside] = await server.db('hospitals').insert({ name: 'Quarrymoor Cottage Hospital', short_name: 'Quarrymoor', trauma_level: 'none', height_unit: 'm', escalation_minutes: 2, created_at: Date.now() }).returning('id');
    const res = await admin.send('POST', '/api/policies', { hospitalId: outside.id, from: 'example' });
    expect(res.status).toBe(403);
    expect(await server.db('policy_versions').where({ hospital_id: outside.id }).count({ n: '*' }).first()).toEqual({ n: 0 });
  });
});

describe('the lifecycle at Alderwick General', () => {
  let draftId: number;
  let before: { caseId: number; summary: { policy: { id: string; version: number; example: boolean }; recommendedLevel: string } };

  it('starts under the shipped example, marked as such', async () => {
    const listing = await (await admin.get(`/api/policies?hospitalId=${general}`)).json();
    expect(listing.inForce).toEqual({ policyId: 'example-tiered', version: 1, name: EXAMPLE_POLICY.name, example: true, versionId: null });
    expect(listing.versions).toEqual([]);
    before = await submit(general);
    expect(before.summary.policy).toEqual({ id: 'example-tiered', version: 1, example: true });
    expect(before.summary.recommendedLevel).toBe('consult');
  });

  it('drafts version 1 as a copy of the example that is no longer an example', async () => {
    const res = await admin.send('POST', '/api/policies', { hospitalId: general, from: 'example' });
    expect(res.status).toBe(201);
    const draft = await res.json();
    draftId = draft.id;
    expect([draft.status, draft.policyId, draft.version, draft.createdBy]).toEqual(['draft', 'alderwick-general-activation', 1, 'Kit Marchetti']);
    expect(draft.document.example).toBe(false);
    expect(draft.document.rules).toEqual(EXAMPLE_POLICY.rules);
  });

  it('refuses a second draft while one is open', async () => {
    const res = await admin.send('POST', '/api/policies', { hospitalId: general });
    expect(res.status).toBe(409);
    expect((await res.json()).error.message).toBe('Version 1 is already a draft; edit or discard it before starting another.');
  });

  it('refuses a rule naming an unknown criterion, naming the field', async () => {
    const edit = stricter(EXAMPLE_POLICY);
    edit.rules[2].criteria.push('field-2021:fell-off-a-unicorn');
    const res = await admin.send('PUT', `/api/policies/${draftId}`, edit);
    expect(res.status).toBe(400);
    const body = await res.json();
    expect(body.error.field).toBe(`rules[2].criteria[${edit.rules[2].criteria.length - 1}]`);
    expect(body.error.message).toBe(`rules[2].criteria[${edit.rules[2].criteria.length - 1}]: unknown criterion id field-2021:fell-off-a-unicorn`);
  });

  it('refuses a policy that leaves a level unreachable', async () => {
    const withoutConsult = { ...stricter(EXAMPLE_POLICY), rules: EXAMPLE_POLICY.rules.filter((rule) => rule.level !== 'consult') };
    const res = await admin.send('PUT', `/api/policies/${draftId}`, withoutConsult);
    expect(res.status).toBe(400);
    const body = await res.json();
    expect(body.error.issues).toEqual([{ field: 'levels[2]', message: 'level consult is unreachable: no rule calls it' }]);
  });

  it('saves the stricter draft', async () => {
    const res = await admin.send('PUT', `/api/policies/${draftId}`, stricter(EXAMPLE_POLICY));
    expect(res.status).toBe(200);
    const saved = await res.json();
    expect(saved.document.rules[1].criteria).toContain('field-2021:anticoagulant');
    expect(saved.document.rules[2].criteria).not.toContain('field-2021:anticoagulant');
    expect(saved.document.levels[1]).toEqual({ id: 'limited', name: 'Trauma team, limited' });
  });

  it('lets only a trauma lead approve', async () => {
    const res = await admin.send('POST', `/api/policies/${draftId}/approve`);
    expect(res.status).toBe(403);
    expect((await res.json()).error.message).toBe('This needs one of these roles: trauma_lead.');
  });

  it('refuses to publish a draft nobody approved', async () => {
    const res = await admin.send('POST', `/api/policies/${draftId}/publish`, {});
    expect(res.status).toBe(409);
    expect((await res.json()).error.message).toBe('Version 1 is a draft; a trauma lead must approve it before it is published.');
  });

  it('records the trauma lead by name and time on approval', async () => {
    const t0 = Date.now();
    const res = await lead.send('POST', `/api/policies/${draftId}/approve`);
    expect(res.status).toBe(200);
    const approved = await res.json();
    expect([approved.status, approved.approvedByName, approved.document.approvedBy]).toEqual(['approved', 'Dr. Sasha Imbert', 'Dr. Sasha Imbert']);
    expect(approved.approvedAt).toBeGreaterThanOrEqual(t0);
    expect(approved.approvedAt).toBeLessThanOrEqual(Date.now());
  });

  it('cannot edit, discard or approve again an approved version', async () => {
    const edit = await admin.send('PUT', `/api/policies/${draftId}`, stricter(EXAMPLE_POLICY));
    expect(edit.status).toBe(409);
    expect((await edit.json()).error.message).toBe('Version 1 is approved and can no longer be changed; start a new draft, which begins as a copy of it.');
    expect((await admin.send('DELETE', `/api/policies/${draftId}`)).status).toBe(409);
    expect((await lead.send('POST', `/api/policies/${draftId}/approve`)).status).toBe(409);
  });

  it('approval alone changes nothing for new evaluations', async () => {
    expect((await policyInForce(server.db, general, Date.now())).id).toBe('example-tiered');
  });

  it('refuses an effective date in the past', async () => {
    const res = await lead.send('POST', `/api/policies/${draftId}/publish`, { effectiveFrom: Date.now() - 86_400_000 });
    expect(res.status).toBe(400);
    expect((await res.json()).error.field).toBe('effectiveFrom');
  });

  it('publishing makes new pre-alerts use the new version and leaves the earlier case on its own', async () => {
    const publishedAt = Date.now();
    const res = await lead.send('POST', `/api/policies/${draftId}/publish`, {});
    expect(res.status).toBe(200);
    const published = await res.json();
    expect([published.status, published.inForce, published.publishedBy]).toEqual(['published', true, 'Dr. Sasha Imbert']);

    const after = await submit(general);
    expect(after.summary.policy).toEqual({ id: 'alderwick-general-activation', version: 1, example: false });
    expect(after.summary.recommendedLevel).toBe('limited');

    const old = await (await nurse.get(`/api/cases/${before.caseId}`)).json();
    expect(old.case.policy).toEqual({ id: 'example-tiered', version: 1, example: true });
    expect(old.case.recommendedLevel).toBe('consult');

    // At a moment before publication the example still decides: the history does not move.
    expect((await policyInForce(server.db, general, publishedAt - 1)).id).toBe('example-tiered');
    // Fenmoor has no policy of its own and stays on the example.
    expect((await submit(community)).summary.policy).toEqual({ id: 'example-tiered', version: 1, example: true });
  });

  it('a published version cannot be edited either', async () => {
    const res = await admin.send('PUT', `/api/policies/${draftId}`, stricter(EXAMPLE_POLICY));
    expect(res.status).toBe(409);
    expect((await res.json()).error.message).toMatch(/^Version 1 is published and can no longer be changed/);
  });

  it('a version published for a later date waits for it', async () => {
    const draft = await (await admin.send('POST', '/api/policies', { hospitalId: general })).json();
    expect([draft.version, draft.document.rules]).toEqual([2, stricter(EXAMPLE_POLICY).rules]);
    expect((await lead.send('POST', `/api/policies/${draft.id}/approve`)).status).toBe(200);
    const later = Date.now() + 7 * 86_400_000;
    const res = await lead.send('POST', `/api/policies/${draft.id}/publish`, { effectiveFrom: later });
    expect(res.status).toBe(200);
    expect((await policyInForce(server.db, general, Date.now())).version).toBe(1);
    expect((await policyInForce(server.db, general, later)).version).toBe(2);
    const listing = await (await lead.get(`/api/policies?hospitalId=${general}`)).json();
    expect(listing.versions.map((v: { version: number; status: string; inForce: boolean }) => [v.version, v.status, v.inForce])).toEqual([[2, 'published', false], [1, 'published', true]]);
  });

  it('wrote one audit row per change, in order, carrying the version', async () => {
    expect(await auditOf(draftId)).toEqual([
      { action: 'policy.draft-created', actor_role: 'admin', policy_id: 'alderwick-general-activation', policy_version: 1 },
      { action: 'policy.draft-saved', actor_role: 'admin', policy_id: 'alderwick-general-activation', policy_version: 1 },
      { action: 'policy.approved', actor_role: 'trauma_lead', policy_id: 'alderwick-general-activation', policy_version: 1 },
      { action: 'policy.published', actor_role: 'trauma_lead', policy_id: 'alderwick-general-activation', policy_version: 1 },
    ]);
  });

  it('an administrator discards a draft, and that too is audited', async () => {
    const draft = await (await admin.send('POST', '/api/policies', { hospitalId: community, from: 'example' })).json();
    expect(draft.policyId).toBe('fenmoor-community-activation');
    expect((await admin.send('DELETE', `/api/policies/${draft.id}`)).status).toBe(204);
    expect((await admin.get(`/api/policies/${draft.id}`)).status).toBe(404);
    expect((await auditOf(draft.id)).map((r) => r.action)).toEqual(['policy.draft-created', 'policy.draft-discarded']);
  });
});
