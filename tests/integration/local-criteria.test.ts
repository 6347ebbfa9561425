import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startTestServer, type TestServer } from '../support/server';
import { signIn, type SignedInClient } from '../support/sign-in';
import { command, connectAs } from '../support/socket';
import type { Policy } from '../../shared/triage/policy';

// A hospital's own criterion on the real product: written into a draft by an administrator,
// refused while nothing can meet it, approved by the trauma lead with the loosening tick,
// published, and then cited in the explanation of a new pre-alert.

let server: TestServer;
let admin: SignedInClient;
let lead: SignedInClient;
let nurse: SignedInClient;
let paramedic: SignedInClient;
let general: number;
let community: number;
let draftId: number;

/**
 * 40-year-old, fall of 5 m (16.4 ft) onto concrete, normal vitals: above 10 ft, so 2021 moderate
 * risk and a consult under the example policy [source: Newgard 2022, 10 ft; SOURCES.md §6, ours];
 * below the example's 20 ft limited rule.
 */
const fallOf16ft = {
  ageYears: 40, sex: 'male', anticoagulant: false, pregnancyWeeks: null,
  fall: { heightM: 5, surface: 'concrete', firstImpact: 'lower-limb-feet', headImpact: false },
  vitals: { sbp: 130, hr: 88, rr: 18, spo2: 97, spo2RoomAir: true, gcs: { eye: 4, verbal: 5, motor: 6 } },
  findings: [], considerations: [],
};

/** "Fall above 15 ft → full team": 15 ft is a local threshold written for this test. */
const fallAbove15ft = (value = 15) => ({
  id: 'new-1', label: 'Fall above 15 ft', reason: 'Trauma committee minutes, 2 November 2026',
  condition: { join: 'all', heightUnit: 'ft', parts: [{ kind: 'measure', measure: 'fallHeight', comparison: 'above', value }] },
});

/** The draft: the local criterion on the full team, and suspected pelvic fracture moved from limited down to consult. */
function edit(doc: Policy, local = fallAbove15ft()) {
  const rules = doc.rules.map((rule) => {
    if (rule.level === 'full') return { ...rule, criteria: [...rule.criteria, local.id] };
    if (rule.level === 'limited') return { ...rule, criteria: rule.criteria.filter((id) => id !== 'field-2021:pelvic-fracture') };
    return { ...rule, criteria: [...rule.criteria, 'field-2021:pelvic-fracture'] };
  });
  return { name: 'Alderwick activation policy', levels: doc.levels, rules, localCriteria: [local] };
}

async function submit(hospitalId: number) {
  const socket = await connectAs(server.url, paramedic);
  try {
    const answer = await command<{ caseId: number }>(socket, 'case:submit', { clientId: randomUUID(), hospitalId, clinical: fallOf16ft });
    if (!answer.ok) throw new Error(`submit refused: ${answer.error.message}`);
    return answer.data.caseId;
  } finally {
    socket.close();
  }
}

beforeAll(async () => {
  server = await startTestServer();
  [admin, lead, nurse, paramedic] = await Promise.all(['admin', 'lead', 'nurse', 'paramedic'].map((who) => signIn(server.url, `${who}@plumbline.test`)));
  const hospitals = await server.db('hospitals').orderBy('id').select('id', 'short_name');
  general = hospitals.find((h) => h.short_name === 'Alderwick General').id;
  community = hospitals.find((h) => h.short_name === 'Fenmoor Community').id;
});
afterAll(() => server?.close());

describe('a local criterion from draft to a new pre-alert', () => {
  let document: Policy;

  it('previews the rule on past cases: the sentence and examples of its own hospital only', async () => {
    const res = await admin.send('POST', '/api/policies/local-preview', { hospitalId: general, condition: fallAbove15ft().condition });
    expect(res.status).toBe(200);
    const preview = await res.json();
    expect(preview.sentence).toBe('Fall above 4.6 m (15 ft)');
    expect(preview.examples.length).toBeLessThanOrEqual(3);
    const caseHospitals = await server.db('cases').whereIn('id', preview.examples.map((e: { caseId: number }) => e.caseId)).distinct('hospital_id');
    expect(caseHospitals.every((row: { hospital_id: number }) => row.hospital_id === general)).toBe(true);
    expect(preview.examples.length).toBeGreaterThan(0);
    for (const example of preview.examples) {
      expect(example.because).toMatch(/^fall .* > 4\.572 m \(15 ft\)$/);
      // The height as a number beside the words, so the form can show it in the hospital's unit.
      expect(example.heights).toEqual([{ text: example.because, heightM: expect.any(Number), compared: { relation: 'above', thresholdM: 4.572 } }]);
    }
    // A charge nurse has no business here; a trauma lead may not preview another hospital's cases.
    expect((await nurse.send('POST', '/api/policies/local-preview', { hospitalId: general, condition: fallAbove15ft().condition })).status).toBe(403);
    expect((await lead.send('POST', '/api/policies/local-preview', { hospitalId: community, condition: fallAbove15ft().condition })).status).toBe(403);
  });

  it('refuses a preview of a rule nothing can meet, naming the part', async () => {
    const res = await admin.send('POST', '/api/policies/local-preview', {
      hospitalId: general,
      condition: { join: 'all', heightUnit: 'ft', parts: [{ kind: 'measure', measure: 'sbp', comparison: 'above', value: 400 }] },
    });
    expect(res.status).toBe(400);
    expect((await res.json()).error).toMatchObject({ field: 'condition.parts[0].value', message: 'condition.parts[0].value: SBP above 400 mmHg: SBP must lie between 0 and 300 mmHg' });
  });

  it('saves a draft with the local criterion under an id of its own version', async () => {
    const created = await (await admin.send('POST', '/api/policies', { hospitalId: general, from: 'example' })).json();
    draftId = created.id;
    const res = await admin.send('PUT', `/api/policies/${draftId}`, edit(created.document));
    expect(res.status).toBe(200);
    const saved = await res.json();
    document = saved.document;
    const [local] = saved.document.localCriteria;
    expect(local.id).toMatch(/^local:alderwick-general-activation:v1:[0-9a-z]+$/);
    expect(local.source).toBe('Local policy of Alderwick General Hospital, version 1');
    expect(local.when).toEqual({ kind: 'above', quantity: 'heightM', value: 4.572, display: '4.572 m (15 ft)' });
    expect(saved.document.rules[0].criteria).toContain(local.id);
    expect(saved.warnings.map((w: { criterion: string }) => w.criterion)).toEqual(['field-2021:pelvic-fracture']);
  });

  it('refuses the draft while its rule is impossible, and keeps the saved one', async () => {
    const res = await admin.send('PUT', `/api/policies/${draftId}`, edit(document, { ...fallAbove15ft(), condition: { join: 'all', heightUnit: 'ft', parts: [{ kind: 'age-band', from: 70, to: 60 }] } } as never));
    expect(res.status).toBe(400);
    expect((await res.json()).error).toMatchObject({ field: 'localCriteria[0].condition.parts[0]', message: 'localCriteria[0].condition.parts[0]: Fall above 15 ft: age band from 70 to 60: the band starts after it ends' });
    const kept = await (await admin.get(`/api/policies/${draftId}`)).json();
    expect(kept.document.localCriteria).toEqual(document.localCriteria);
  });

  it('refuses a stored criterion tampered with in the database at approval', async () => {
    const row = await server.db('policy_versions').where({ id: draftId }).first('document');
    const tampered = JSON.parse(row.document);
    tampered.localCriteria[0].when.value = 100;
    await server.db('policy_versions').where({ id: draftId }).update({ document: JSON.stringify(tampered) });
    const res = await lead.send('POST', `/api/policies/${draftId}/approve`, { looseningAcknowledged: true });
    expect(res.status).toBe(400);
    expect((await res.json()).error.field).toBe('localCriteria[0].when');
    await server.db('policy_versions').where({ id: draftId }).update({ document: row.document });
  });

  it('is approved by the trauma lead only with the tick, which the approval records', async () => {
    const unticked = await lead.send('POST', `/api/policies/${draftId}/approve`, {});
    expect(unticked.status).toBe(400);
    const refusal = (await unticked.json()).error;
    expect(refusal.field).toBe('looseningAcknowledged');
    expect(refusal.message).toContain('Suspected pelvic fracture');
    expect((await server.db('policy_versions').where({ id: draftId }).first('status')).status).toBe('draft');

    const res = await lead.send('POST', `/api/policies/${draftId}/approve`, { looseningAcknowledged: true });
    expect(res.status).toBe(200);
    const approved = await res.json();
    expect([approved.status, approved.approvedByName]).toEqual(['approved', 'Dr. Sasha Imbert']);
    expect(approved.looseningAcknowledged.map((w: { criterion: string }) => w.criterion)).toEqual(['field-2021:pelvic-fracture']);
    const audit = await server.db('audit_log').where({ entity: 'policy', entity_id: String(draftId), action: 'policy.approved' }).first('after');
    expect(JSON.parse(audit.after).looseningAcknowledged).toEqual(['Suspected pelvic fracture (2021 high-risk) is loosened: it calls Trauma consult, where it called Limited trauma team']);
  });

  it('is published, and a new pre-alert is evaluated under it with the local source in its explanation', async () => {
    expect((await admin.send('POST', `/api/policies/${draftId}/publish`, {})).status).toBe(200);
    const caseId = await submit(general);
    const detail = await (await nurse.get(`/api/cases/${caseId}`)).json();
    const result = detail.case.latest.result;
    expect(result.policy).toEqual({ id: 'alderwick-general-activation', version: 1, example: false });
    expect(result.activation).toBe('full');
    const local = result.criteria.find((c: { set: string }) => c.set === 'local');
    expect(local).toMatchObject({
      label: 'Fall above 15 ft', calls: 'full', because: 'fall 5 m (16.4 ft) > 4.572 m (15 ft)',
      source: 'Local policy of Alderwick General Hospital, version 1. Reason: Trauma committee minutes, 2 November 2026',
    });
  });

  it('carries the criterion into the next draft under that version', async () => {
    const next = await (await admin.send('POST', '/api/policies', { hospitalId: general, from: 'in-force' })).json();
    const [local] = next.document.localCriteria;
    expect(local.id).toMatch(/^local:alderwick-general-activation:v2:/);
    expect(local.source).toBe('Local policy of Alderwick General Hospital, version 2');
    expect(next.document.rules[0].criteria).toContain(local.id);
    expect(next.document.rules[0].criteria.some((id: string) => id.includes(':v1:'))).toBe(false);
  });

  it('refuses a flood of previews from one account with 429, and not the next person', async () => {
    const body = { hospitalId: general, condition: fallAbove15ft().condition };
    const statuses: number[] = [];
    for (let i = 0; i < 125 && !statuses.includes(429); i++) statuses.push((await lead.send('POST', '/api/policies/local-preview', body)).status);
    // 120 a minute per person: the lead asked once before, from another hospital.
    expect(statuses.filter((s) => s === 200).length).toBe(119);
    expect(statuses.at(-1)).toBe(429);
    expect((await admin.send('POST', '/api/policies/local-preview', body)).status).toBe(200);
  });
});
