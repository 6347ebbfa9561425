import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startTestServer, type TestServer } from '../support/server';
import { browserlessClient, signIn, type SignedInClient } from '../support/sign-in';
import { loadMe } from '../../server/auth/guards';
import { submitPreAlert } from '../../server/services/cases/commands';
import { evaluationInputRow } from '../../server/services/cases/evaluation-input';
import { up as backfillEvaluationInputs } from '../../migrations/20261205010001_case_evaluation_inputs_backfill';
import type { Drilldown, QualityReport, WhatIfResult } from '../../shared/schemas/quality';
import type { LevelId } from '../../shared/triage/policy';

// The over- and under-triage report against a case set whose Cribari matrix is counted by hand
// below, the drill-down behind its cells, the CSV export, and a what-if whose answer is known.
// Cribari: a full & major, b full & not, c not full & major, d not full & not; over-triage
// b/(a+b), under-triage c/(c+d) [source: ACS-COT method, SOURCES.md §7]; the second definition
// c/(a+c) and b/(b+d) [memory: Peng & Xiang 2016]. Major trauma = ISS > 15 [source: Baker 1974].

let server: TestServer;
let quality: SignedInClient;
let lead: SignedInClient;
let admin: SignedInClient;
let nurse: SignedInClient;
let paramedic: SignedInClient;
let general: number;
let community: number;
let paramedicId: number;
let now = Date.now();
const clock = { now: () => now };

const normalVitals = { sbp: 130, hr: 80, rr: 16, spo2: 98, spo2RoomAir: true, gcs: { eye: 4, verbal: 5, motor: 6 }, intubated: false, respiratorySupport: false, respiratoryDistress: false };
const patient = (heightM: number, vitals: object = {}) => ({
  ageYears: 40, sex: 'male', anticoagulant: false, pregnancyWeeks: null,
  fall: { heightM, surface: 'concrete', firstImpact: 'lower-limb-feet', headImpact: false },
  vitals: { ...normalVitals, ...vitals }, findings: [], considerations: [],
});
/** Each recommended level under the shipped example policy (SOURCES.md §6 [ours]). */
const FULL = patient(0, { sbp: 80, hr: 70 }); // SBP 80 < 90 at 40 years → full
const LIMITED = patient(7); // 7 m > 20 ft → limited
const CONSULT = patient(4); // 4 m > 10 ft → consult
const NONE = patient(1); // 1 m, normal vitals → none

interface Fixture { clinical: object; day: string; decided: LevelId | null; state?: string; iss?: number | null; nfti?: 'yes' | 'no' | '' }
// The hand count. ISS standard, decided level (recommended when undecided):
//   a = #1, #5   b = #2, #9   c = #3, #6   d = #4, #7, #8   ISS unknown: #10   no outcome: #11   cancelled: #12
const FIXTURES: Fixture[] = [
  { clinical: FULL, day: '2031-01-05', decided: 'full', iss: 25, nfti: 'yes' }, // 1 a
  { clinical: FULL, day: '2031-01-09', decided: 'full', iss: 9, nfti: 'no' }, // 2 b
  { clinical: CONSULT, day: '2031-01-12', decided: 'consult', iss: 17, nfti: 'yes' }, // 3 c
  { clinical: NONE, day: '2031-01-20', decided: null, iss: 4, nfti: 'no' }, // 4 d, never decided
  { clinical: CONSULT, day: '2031-01-28', decided: 'full', iss: 22, nfti: 'yes' }, // 5 a: the nurse escalated
  { clinical: LIMITED, day: '2031-02-01T03:00:00Z', decided: 'limited', iss: 26, nfti: 'yes' }, // 6 c
  { clinical: NONE, day: '2031-02-07', decided: 'none', iss: 1, nfti: 'no' }, // 7 d
  { clinical: NONE, day: '2031-02-11', decided: 'none', iss: 2, nfti: 'no' }, // 8 d
  { clinical: FULL, day: '2031-02-15', decided: 'full', iss: 10, nfti: 'yes' }, // 9 b (a under NFTI)
  { clinical: CONSULT, day: '2031-02-19', decided: 'consult', iss: null, nfti: 'yes' }, // 10 ISS unknown
  { clinical: CONSULT, day: '2031-02-22', decided: 'consult' }, // 11 no outcome yet
  { clinical: CONSULT, day: '2031-02-25', decided: null, state: 'cancelled' }, // 12 cancelled: not a patient here
];
const numbers: string[] = [];
const ids: number[] = [];

/** The period of the fixtures; `extra` adds or overrides query parameters. */
function q(extra = ''): string {
  const params = new URLSearchParams({ hospitalId: String(general), from: '2031-01-01', to: '2031-02-28', timeZone: 'UTC' });
  for (const [key, value] of new URLSearchParams(extra)) params.set(key, value);
  return params.toString().replace(/%3A/g, ':');
}

async function makeCase(f: Fixture): Promise<{ id: number; number: string }> {
  now = Date.parse(f.day.includes('T') ? f.day : `${f.day}T10:00:00Z`);
  const me = (await loadMe(server.db, paramedicId))!;
  const { caseId } = await submitPreAlert(server.db, clock, { me, role: 'paramedic' }, { clientId: randomUUID(), hospitalId: general, clinical: f.clinical as never });
  // The board's decide and close steps, set directly: this file is about what the report counts.
  await server.db('cases').where({ id: caseId }).update({ decided_level: f.decided, state: f.state ?? 'closed', closed_at: now + 3_600_000 });
  const row = await server.db('cases').where({ id: caseId }).first('case_number');
  return { id: caseId, number: row.case_number };
}

function upload(client: SignedInClient, path: string, csv: string, hospitalId = general) {
  const form = new FormData();
  form.set('hospitalId', String(hospitalId));
  form.set('file', new Blob([csv], { type: 'text/csv' }), 'outcomes.csv');
  return client.fetch(new URL(path, server.url), { method: 'POST', body: form, headers: { origin: new URL(server.url).origin, accept: 'application/json' } });
}

beforeAll(async () => {
  server = await startTestServer({}, { clock });
  [quality, lead, admin, nurse, paramedic] = await Promise.all(['quality', 'lead', 'admin', 'nurse', 'paramedic'].map((who) => signIn(server.url, `${who}@plumbline.test`)));
  const hospitals = await server.db('hospitals').select('id', 'short_name');
  general = hospitals.find((h) => h.short_name === 'Alderwick General').id;
  community = hospitals.find((h) => h.short_name === 'Fenmoor Community').id;
  paramedicId = (await server.db('users').where({ email: 'paramedic@plumbline.test' }).first('id')).id;
  for (const f of FIXTURES) {
    const made = await makeCase(f);
    ids.push(made.id);
    numbers.push(made.number);
  }
  const lines = FIXTURES.flatMap((f, i) => (f.iss === undefined ? [] : [`${numbers[i]},${f.iss ?? ''},${f.nfti ?? ''},home`]));
  const saved = await upload(quality, '/api/quality/outcomes/import', `case_number,iss,nfti,disposition\n${lines.join('\n')}\n`);
  expect(saved.status, await saved.clone().text()).toBe(201);
  now = Date.parse('2031-03-10T09:00:00Z');
});
afterAll(() => server?.close());

const report = async (extra = '', client = quality): Promise<QualityReport> => {
  const res = await client.get(`/api/quality/report?${q(extra)}`);
  expect(res.status, await res.clone().text()).toBe(200);
  return res.json();
};

describe('the Cribari matrix against the hand count', () => {
  it('ISS > 15, decided level: a 2, b 2, c 2, d 3; over-triage 2/4 = 50 %, under-triage 2/5 = 40 %', async () => {
    const r = await report();
    expect(r.cases).toBe(11); // the cancelled case is not a patient of this ED
    expect(r.withOutcome).toBe(10);
    expect(r.undecided).toBe(1);
    expect(r.matrix).toMatchObject({ a: 2, b: 2, c: 2, d: 3, excluded: 1, overTriage: 0.5, underTriage: 0.4 });
    // Wilson 95 % for 2/4 [source: Wilson 1927]: centre 0.5, half-width 0.3500.
    expect(r.matrix.overTriageCI![0]).toBeCloseTo(0.15, 3);
    expect(r.matrix.overTriageCI![1]).toBeCloseTo(0.85, 3);
    expect(r.matrix.sensitivityDefinition).toMatchObject({ underTriage: 0.5, overTriage: 0.4 });
  });

  it('with the recommended level as the activation, the escalated case #5 moves from a to c', async () => {
    const r = await report('&basis=recommended');
    expect(r.matrix).toMatchObject({ a: 1, b: 2, c: 3, d: 3, overTriage: 2 / 3, underTriage: 0.5 });
    const decided = await report();
    expect(decided.recommendedMatrix).toMatchObject({ a: 1, b: 2, c: 3, d: 3 });
  });

  it('NFTI standard: a 3, b 1, c 3, d 3; over-triage 1/4, under-triage 3/6', async () => {
    const r = await report('&standard=nfti');
    expect(r.matrix).toMatchObject({ a: 3, b: 1, c: 3, d: 3, excluded: 0, overTriage: 0.25, underTriage: 0.5 });
  });

  it('by month: January a 2, b 1, c 1, d 1; February b 1, c 1, d 2 and one unknown', async () => {
    const r = await report();
    expect(r.months.map((m) => [m.key, m.a, m.b, m.c, m.d, m.excluded])).toEqual([
      ['2031-01', 2, 1, 1, 1, 0],
      ['2031-02', 0, 1, 1, 2, 1],
    ]);
  });

  it('a month begins at the reader’s midnight: 03:00 UTC on 1 February is still January in New York', async () => {
    const r = await report('&timeZone=America/New_York');
    expect(r.months.map((m) => [m.key, m.a, m.b, m.c, m.d, m.excluded])).toEqual([
      ['2031-01', 2, 1, 2, 1, 0],
      ['2031-02', 0, 1, 0, 2, 1],
    ]);
    expect(r.matrix).toMatchObject({ a: 2, b: 2, c: 2, d: 3 });
  });

  it('by fall-height band and by agency', async () => {
    const r = await report();
    const band = Object.fromEntries(r.heightBands.map((g) => [g.key, [g.a, g.b, g.c, g.d, g.excluded]]));
    expect(band).toEqual({ standing: [1, 2, 0, 0, 0], 'to-3m': [0, 0, 0, 3, 0], '3-6m': [1, 0, 1, 0, 1], '6-15m': [0, 0, 1, 0, 0], 'over-15m': [0, 0, 0, 0, 0] });
    expect(r.agencies).toHaveLength(1);
    expect(r.agencies[0]).toMatchObject({ label: 'Alderwick County Ambulance Service', a: 2, b: 2, c: 2, d: 3 });
  });

  it('per criterion: fall > 10 ft fired in 3 cases with a known ISS, all major (PPV 100 %), 2 of them under-triaged', async () => {
    const r = await report();
    const fall = r.criteria.find((c) => c.id === 'field-2021:fall-above-10-ft')!;
    expect(fall).toMatchObject({ fired: 3, major: 3, ppv: 1, inOverTriaged: 0, inUnderTriaged: 2 });
    const sbp = r.criteria.find((c) => c.id === 'policy:sbp-below-90-age-10-up')!;
    expect(sbp).toMatchObject({ fired: 3, major: 1, inOverTriaged: 2, inUnderTriaged: 0 });
    expect(sbp.ppv).toBeCloseTo(1 / 3, 10);
  });

  it('reads the targets from the settings, defaults from SOURCES.md §5 and §7, and says where the figures stand', async () => {
    const r = await report();
    // Under-triage < 5 % [source: Mohan 2011]; over-triage 25–35 % [memory], < 50 % system [source: Mohan 2011].
    expect(r.targets).toEqual({ underTriageMax: 0.05, overTriageHospital: [0.25, 0.35], overTriageSystemMax: 0.5 });
    // 2/5 under-triaged: the interval (about 12–77 %) lies wholly above 5 %.
    expect(r.standing).toEqual({ underTriage: 'misses', overTriage: 'uncertain' });
    const put = await quality.send('PUT', '/api/quality/targets', { hospitalId: general, targets: { underTriageMax: 0.5, overTriageHospital: [0.2, 0.4], overTriageSystemMax: 0.5 } });
    expect(put.status).toBe(200);
    expect((await report()).standing.underTriage).toBe('uncertain');
    const bad = await quality.send('PUT', '/api/quality/targets', { hospitalId: general, targets: { underTriageMax: 5, overTriageHospital: [0.25, 0.35], overTriageSystemMax: 0.5 } });
    expect(bad.status).toBe(400);
    expect((await bad.json()).error.message).toBe('targets.underTriageMax: must be at most 1');
    await quality.send('PUT', '/api/quality/targets', { hospitalId: general, targets: { underTriageMax: 0.05, overTriageHospital: [0.25, 0.35], overTriageSystemMax: 0.5 } });
    const audited = await server.db('audit_log').where({ entity: 'setting', entity_id: `${general}:quality.targets` }).count({ n: '*' }).first();
    expect(Number(audited!.n)).toBe(2);
  });
});

describe('drill-down from a cell to its cases', () => {
  it('cell c lists the two under-triaged cases, newest first', async () => {
    const res = await quality.get(`/api/quality/cases?${q('&cell=c')}`);
    const body: Drilldown = await res.json();
    expect(body.total).toBe(2);
    expect(body.cases.map((c) => c.caseNumber)).toEqual([numbers[5], numbers[2]]);
    expect(body.cases[0]).toMatchObject({ id: ids[5], recommendedLevel: 'limited', decidedLevel: 'limited', iss: 26, cell: 'c', heightM: 7 });
  });

  it('narrows by month, band and criterion the way the report counts them', async () => {
    const jan = (await (await quality.get(`/api/quality/cases?${q('&cell=a&month=2031-01')}`)).json()) as Drilldown;
    expect(jan.cases.map((c) => c.caseNumber)).toEqual([numbers[4], numbers[0]]);
    const band = (await (await quality.get(`/api/quality/cases?${q('&band=standing&cell=b')}`)).json()) as Drilldown;
    expect(band.cases.map((c) => c.caseNumber)).toEqual([numbers[8], numbers[1]]);
    const crit = (await (await quality.get(`/api/quality/cases?${q('&criterion=field-2021:fall-above-10-ft')}`)).json()) as Drilldown;
    expect(crit.cases.map((c) => c.caseNumber)).toEqual([numbers[5], numbers[4], numbers[2]]);
    const missing = (await (await quality.get(`/api/quality/cases?${q('&cell=no-outcome')}`)).json()) as Drilldown;
    expect(missing.cases.map((c) => c.caseNumber)).toEqual([numbers[10]]);
  });
});

describe('export', () => {
  it('the CSV carries the matrix line by line, with formulas neutralised', async () => {
    const res = await quality.get(`/api/quality/report.csv?${q()}`);
    expect(res.status).toBe(200);
    expect(res.headers.get('content-type')).toBe('text/csv; charset=utf-8');
    expect(res.headers.get('content-disposition')).toBe('attachment; filename=triage-quality-2031-01-01-to-2031-02-28.csv');
    const lines = (await res.text()).replace(/^\uFEFF/, '').split('\r\n');
    expect(lines[0]).toBe('section,group,a,b,c,d,outcome_unknown,over_triage_pct,over_triage_95_low,over_triage_95_high,under_triage_pct,under_triage_95_low,under_triage_95_high,over_triage_1_minus_specificity_pct,under_triage_1_minus_sensitivity_pct,fired,major,ppv_pct,ppv_95_low,ppv_95_high,note');
    expect(lines.find((l) => l.startsWith('overall,decided,'))).toBe('overall,decided,2,2,2,3,1,50,15,85,40,11.8,76.9,40,50,,,,,,');
    expect(lines.find((l) => l.startsWith('month,2031-02,'))).toMatch(/^month,2031-02,0,1,1,2,1,100,/);
  });
});

describe('who may read the report', () => {
  it('lets the quality team, the trauma lead and the administrator read; refuses a charge nurse and a paramedic', async () => {
    for (const client of [quality, lead, admin]) expect((await client.get(`/api/quality/report?${q()}`)).status).toBe(200);
    for (const client of [nurse, paramedic]) expect((await client.get(`/api/quality/report?${q()}`)).status).toBe(403);
    expect((await browserlessClient(server.url).get(`/api/quality/report?${q()}`)).status).toBe(401);
  });

  it("refuses another hospital's report to the trauma lead, and lets the admin of both read it", async () => {
    const other = `hospitalId=${community}&from=2031-01-01&to=2031-02-28`;
    const refused = await lead.get(`/api/quality/report?${other}`);
    expect(refused.status).toBe(403);
    expect((await refused.json()).error.message).toBe('That hospital is not one of yours.');
    expect((await admin.get(`/api/quality/report?${other}`)).status).toBe(200);
    expect((await lead.get(`/api/quality/cases?${other}&cell=c`)).status).toBe(403);
  });

  it('answers a bad period with a 400 naming the field', async () => {
    const res = await quality.get(`/api/quality/report?hospitalId=${general}&from=2031-03-01&to=2031-01-31`);
    expect(res.status).toBe(400);
    expect((await res.json()).error.message).toBe('to: must be on or after the start date');
    const zone = await quality.get(`/api/quality/report?${q('&timeZone=Mars/Olympus')}`);
    expect((await zone.json()).error.message).toBe('timeZone: must be a time zone name such as Europe/London');
  });
});

describe('what-if', () => {
  let draftId: number;
  beforeAll(async () => {
    const created = await admin.send('POST', '/api/policies', { hospitalId: general, from: 'example' });
    expect(created.status).toBe(201);
    const draft = await created.json();
    draftId = draft.id;
    // Stricter for the full team: SBP < 90 alone no longer calls it; the 2021 high-risk SBP
    // criterion still calls the limited team.
    const rules = draft.document.rules.map((rule: { level: string; criteria: string[] }) =>
      rule.level === 'full' ? { ...rule, criteria: rule.criteria.filter((id) => id !== 'policy:sbp-below-90-age-10-up') } : rule,
    );
    const saved = await admin.send('PUT', `/api/policies/${draftId}`, { name: 'Stricter full team', levels: draft.document.levels, rules });
    expect(saved.status, await saved.clone().text()).toBe(200);
  });

  it('lists the policy in force and the draft to the quality team', async () => {
    const res = await quality.get(`/api/quality/policies?hospitalId=${general}`);
    const { policies } = await res.json();
    expect(policies.map((p: { value: unknown; status: string }) => [p.value, p.status])).toEqual([['in-force', 'in-force'], [draftId, 'draft']]);
  });

  it('the stricter draft calls the full team for none of the three hypotensive patients: fewer activations, more under-triage', async () => {
    const res = await quality.send('POST', '/api/quality/what-if', { hospitalId: general, from: '2031-01-01', to: '2031-02-28', timeZone: 'UTC', standard: 'iss', policy: draftId });
    expect(res.status, await res.clone().text()).toBe(200);
    const r: WhatIfResult = await res.json();
    expect(r.policy).toMatchObject({ name: 'Stricter full team', status: 'draft' });
    expect(r.cases).toBe(11);
    expect(r.levels.recommended).toEqual({ full: 3, limited: 1, consult: 4, none: 3 });
    expect(r.levels.whatIf).toEqual({ full: 0, limited: 4, consult: 4, none: 3 });
    expect(r.levels.decided).toEqual({ full: 4, limited: 1, consult: 3, none: 3 });
    expect(r.matrix.recommended).toMatchObject({ a: 1, b: 2, c: 3, d: 3, underTriage: 0.5 });
    // #1 (ISS 25) joins c; #2 and #9 (ISS 9, 10) join d: c 4, d 5, under-triage 4/9.
    expect(r.matrix.whatIf).toMatchObject({ a: 0, b: 0, c: 4, d: 5, underTriage: 4 / 9, overTriage: null });
    expect(r).toMatchObject({ changed: 3, raised: 0, lowered: 3, limited: false });
    expect(r.changes.map((c) => [c.caseNumber, c.from, c.inForce, c.to, c.iss, c.major])).toEqual([
      [numbers[8], 'full', 'full', 'limited', 10, false],
      [numbers[1], 'full', 'full', 'limited', 9, false],
      [numbers[0], 'full', 'full', 'limited', 25, true],
    ]);
  });

  it('carries the policy in force now beside the draft, over the same cases', async () => {
    const res = await quality.send('POST', '/api/quality/what-if', { hospitalId: general, from: '2031-01-01', to: '2031-02-28', timeZone: 'UTC', standard: 'iss', policy: draftId });
    const r: WhatIfResult = await res.json();
    // Nothing is published at General, so the shipped example is in force; it recommended every
    // one of these cases, so its column is the "recommended at the time" column.
    expect(r.inForce?.policy).toMatchObject({ id: 'example-tiered', example: true, status: 'in-force' });
    expect(r.inForce?.levels).toEqual({ full: 3, limited: 1, consult: 4, none: 3 });
    expect(r.inForce?.matrix).toEqual(r.matrix.recommended);
    expect(r.inForce?.matrix).toMatchObject({ a: 1, b: 2, c: 3, d: 3, excluded: 1 });
  });

  it('the policy in force changes nothing, and is not repeated beside itself', async () => {
    const res = await lead.send('POST', '/api/quality/what-if', { hospitalId: general, from: '2031-01-01', to: '2031-02-28', policy: 'in-force' });
    const r: WhatIfResult = await res.json();
    expect(r).toMatchObject({ changed: 0, changes: [], inForce: null });
    expect(r.matrix.whatIf).toEqual(r.matrix.recommended);
  });

  it('evaluates the latest revision of a case revised since the last what-if', async () => {
    const ask = async () => (await (await quality.send('POST', '/api/quality/what-if', { hospitalId: general, from: '2031-01-01', to: '2031-02-28', policy: draftId })).json()) as WhatIfResult;
    expect((await ask()).levels.whatIf.none).toBe(3);
    // Case #11 (consult, no outcome) gets a second pre-alert: a 1 m fall with normal vitals,
    // which calls no team (the NONE patient above). Written directly, as the crew's update writes it.
    const first = await server.db('case_revisions').where({ case_id: ids[10], revision: 1 }).first();
    await server.db.transaction(async (trx) => {
      await trx('case_revisions').insert({ ...first, id: undefined, revision: 2, input: JSON.stringify(NONE), activation: 'none' });
      await trx('cases').where({ id: ids[10] }).update({ current_revision: 2, recommended_level: 'none' });
    });
    const r = await ask();
    expect(r.levels.whatIf).toEqual({ full: 0, limited: 4, consult: 3, none: 4 });
    expect(r.inForce?.levels).toEqual(r.levels.recommended);
    expect(r.changed).toBe(3);
  });

  it('the backfill copies every case\'s latest input as a new revision writes it', async () => {
    const written = await server.db('case_evaluation_inputs').orderBy('case_id').select('case_id', 'revision', 'numbers', 'words');
    expect(written.length).toBeGreaterThan(10);
    await server.db('case_evaluation_inputs').delete();
    await backfillEvaluationInputs(server.db);
    // Case #11 was revised above by a direct write that left its compact row at revision 1; the
    // backfill reads the revision in force, the NONE patient.
    const revised = evaluationInputRow(ids[10], 2, 'field-2021', NONE as never);
    expect(await server.db('case_evaluation_inputs').orderBy('case_id').select('case_id', 'revision', 'numbers', 'words'))
      .toEqual(written.map((row) => (row.case_id === ids[10] ? revised : row)));
  });

  it("refuses a version of another hospital's policy", async () => {
    const other = await admin.send('POST', '/api/policies', { hospitalId: community, from: 'example' });
    const { id } = await other.json();
    const res = await admin.send('POST', '/api/quality/what-if', { hospitalId: general, from: '2031-01-01', to: '2031-02-28', policy: id });
    expect(res.status).toBe(403);
    expect((await res.json()).error.message).toBe('That policy version belongs to another hospital.');
    expect((await nurse.send('POST', '/api/quality/what-if', { hospitalId: general, from: '2031-01-01', to: '2031-02-28', policy: 'in-force' })).status).toBe(403);
  });
});
