import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { hashPassword } from '../../server/auth/passwords';
import { verifyAuditChain } from '../../server/services/audit/audit';
import type { CaseSummary } from '../../shared/schemas/cases';
import type { CrewDestinations } from '../../shared/schemas/crew';
import { startTestServer, type TestServer } from '../support/server';
import { signIn, type SignedInClient } from '../support/sign-in';
import { command, connectAs, nextEvent, type TestSocket } from '../support/socket';

// Check values: 2021 field-triage guideline (Newgard CD et al., 2022) [source] for the field
// risk; the shipped example policy (SOURCES.md §6) [ours] for the activation level.

let server: TestServer;
let medic: SignedInClient;
let crew: TestSocket;
let board: TestSocket;
let general: number;
let community: number;
let outsider: SignedInClient;
let outsiderCrew: TestSocket;

type SubmitData = { caseId: number; caseNumber: string; created: boolean; summary: CaseSummary };

const preAlert = (over: Record<string, unknown> = {}) => ({
  clientId: randomUUID(),
  hospitalId: general,
  etaMinutes: 14,
  // 34-year-old, fell 4 m (13.1 ft) onto concrete, SBP 120: moderate (fall > 10 ft) → consult.
  clinical: { ageYears: 34, sex: 'male', fall: { heightM: 4, surface: 'concrete', firstImpact: 'lower-limb-feet', headImpact: false }, vitals: { sbp: 120, hr: 88, rr: 18 } },
  ...over,
});

const countCases = async () => Number((await server.db('cases').count({ n: '*' }).first())!.n);

async function submit(payload: unknown, socket = crew) {
  return command<SubmitData>(socket, 'case:submit', payload);
}

async function submitted(payload = preAlert()): Promise<SubmitData> {
  const answer = await submit(payload);
  if (!answer.ok) throw new Error(`submit refused: ${answer.error.message}`);
  return answer.data;
}

/** Nothing else arrives on this socket for a while: a broadcast that must not happen did not. */
async function silence(socket: TestSocket, event: 'case:submitted' | 'case:updated', ms = 400): Promise<number> {
  let heard = 0;
  const listener = () => heard++;
  socket.on(event, listener);
  await new Promise((resolve) => setTimeout(resolve, ms));
  socket.off(event, listener);
  return heard;
}

beforeAll(async () => {
  server = await startTestServer();
  general = (await server.db('hospitals').where({ name: 'Alderwick General Hospital' }).first('id')).id;
  community = (await server.db('hospitals').where({ name: 'Fenmoor Community Hospital' }).first('id')).id;

  // A second, invented agency that takes patients to Fenmoor only, with its own paramedic.
  const [agency] = await server.db('agencies').insert({ name: 'Harrowgate Valley Ambulance Trust', created_at: Date.now() }).returning('id');
  await server.db('agency_hospitals').insert({ agency_id: agency.id, hospital_id: community });
  await server.db('units').insert({ agency_id: agency.id, call_sign: 'Valley 2', active: true });
  const [user] = await server.db('users').insert({ email: 'valley.medic@plumbline.test', name: 'Ari Thornbury', password_hash: await hashPassword('valley-pass'), active: true, created_at: Date.now() }).returning('id');
  await server.db('user_roles').insert({ user_id: user.id, role: 'paramedic' });
  await server.db('memberships').insert({ user_id: user.id, agency_id: agency.id, hospital_id: null });

  medic = await signIn(server.url, 'paramedic@plumbline.test');
  const nurse = await signIn(server.url, 'nurse@plumbline.test');
  outsider = await signIn(server.url, 'valley.medic@plumbline.test', 'valley-pass');
  crew = await connectAs(server.url, medic);
  board = await connectAs(server.url, nurse);
  outsiderCrew = await connectAs(server.url, outsider);
});

afterAll(async () => {
  for (const socket of [crew, board, outsiderCrew]) socket?.close();
  await server?.close();
});

describe('GET /api/crew/destinations', () => {
  it('gives the paramedic their agency’s hospitals, each with its policy in force, and its active units', async () => {
    const res = await medic.get('/api/crew/destinations');
    expect(res.status).toBe(200);
    const body = (await res.json()) as CrewDestinations;
    expect(body.agencies.map((a) => a.name)).toEqual(['Alderwick County Ambulance Service']);
    expect(body.hospitals.map((h) => [h.name, h.heightUnit, h.policy.id])).toEqual([
      ['Alderwick General Hospital', 'ft', 'example-tiered'],
      ['Fenmoor Community Hospital', 'm', 'example-tiered'],
    ]);
    expect(body.units.map((u) => u.callSign)).toEqual(['Medic 11', 'Medic 12', 'Medic 14', 'Medic 21', 'Rescue 3']);
  });

  it('shows another agency’s paramedic only their own destinations and units', async () => {
    const body = (await (await outsider.get('/api/crew/destinations')).json()) as CrewDestinations;
    expect(body.hospitals.map((h) => h.name)).toEqual(['Fenmoor Community Hospital']);
    expect(body.units.map((u) => u.callSign)).toEqual(['Valley 2']);
  });

  it('is refused to a charge nurse (403) and to nobody signed in (401)', async () => {
    const nurse = await signIn(server.url, 'nurse@plumbline.test');
    expect((await nurse.get('/api/crew/destinations')).status).toBe(403);
    expect((await fetch(`${server.url}/api/crew/destinations`)).status).toBe(401);
  });
});

describe('case:submit', () => {
  it('acknowledges with the server’s case number and announces the case to the destination’s board', async () => {
    const before = await countCases();
    const announced = nextEvent<[CaseSummary]>(board, 'case:submitted');
    const payload = preAlert();
    const data = await submitted(payload);
    expect(data.created).toBe(true);
    expect(data.caseNumber).toMatch(/^P\d{2}-\d{5}$/);
    // Fall 4 m > 3.048 m (10 ft) [source: Newgard 2022] → moderate; the example policy calls a consult.
    expect(data.summary).toMatchObject({ caseNumber: data.caseNumber, clientId: payload.clientId, state: 'en-route', fieldRisk: 'moderate', recommendedLevel: 'consult', revision: 1, levelRose: false });
    expect(data.summary.latest.result.criteria.map((c) => [c.id, c.because])).toEqual([['field-2021:fall-above-10-ft', 'fall 4 m (13.1 ft) > 3.048 m (10 ft)']]);
    const [summary] = await announced;
    expect(summary.caseNumber).toBe(data.caseNumber);
    expect(await countCases()).toBe(before + 1);
    expect(await server.db('case_revisions').where({ case_id: data.caseId }).count({ n: '*' }).first()).toEqual({ n: 1 });
    expect((await server.db('case_events').where({ case_id: data.caseId }).select('kind')).map((e) => e.kind)).toEqual(['received']);
    expect((await verifyAuditChain(server.db)).ok).toBe(true);
  });

  it('the same client id sent twice makes one case, and the board hears of it once', async () => {
    const payload = preAlert();
    const before = await countCases();
    const first = await submitted(payload);
    await silence(board, 'case:submitted', 100);
    const heardAfterRetry = silence(board, 'case:submitted');
    const again = await submitted(payload);
    expect(again).toMatchObject({ caseId: first.caseId, caseNumber: first.caseNumber, created: false });
    expect(await heardAfterRetry).toBe(0);
    expect(await countCases()).toBe(before + 1);
    expect(await server.db('cases').where({ client_id: payload.clientId }).count({ n: '*' }).first()).toEqual({ n: 1 });
  });

  it('the board and every crew of the agency hear a pre-alert once, a nurse who also rides as crew once too', async () => {
    const agency = (await server.db('agencies').where({ name: 'Alderwick County Ambulance Service' }).first('id')).id;
    const [user] = await server.db('users').insert({ email: 'both.rooms@plumbline.test', name: 'Sam Okonjo-Reyes', password_hash: await hashPassword('both-pass'), active: true, created_at: Date.now() }).returning('id');
    await server.db('user_roles').insert([{ user_id: user.id, role: 'paramedic' }, { user_id: user.id, role: 'charge_nurse' }]);
    await server.db('memberships').insert([{ user_id: user.id, hospital_id: general, agency_id: null }, { user_id: user.id, hospital_id: null, agency_id: agency }]);
    const both = await connectAs(server.url, await signIn(server.url, 'both.rooms@plumbline.test', 'both-pass'));
    try {
      const rooms = await new Promise<string[]>((resolve) => both.emit('session:rooms', (answer) => resolve(answer.ok ? answer.data.rooms : [])));
      expect(rooms.sort()).toEqual([`agency:${agency}`, `hospital:${general}`, `user:${user.id}`].sort());
      const heard = [both, board, crew].map((socket) => silence(socket, 'case:submitted', 600));
      await submitted();
      expect(await Promise.all(heard)).toEqual([1, 1, 1]);
    } finally {
      both.close();
    }
  });

  it('the same client id sent from two tabs at the same moment still makes one case', async () => {
    const payload = preAlert();
    const second = await connectAs(server.url, medic);
    const before = await countCases();
    const [a, b] = await Promise.all([submit(payload), submit(payload, second)]);
    second.close();
    expect(a.ok && b.ok).toBe(true);
    if (!a.ok || !b.ok) return;
    expect(a.data.caseId).toBe(b.data.caseId);
    expect([a.data.created, b.data.created].sort()).toEqual([false, true]);
    expect(await countCases()).toBe(before + 1);
  });

  it('refuses an SBP of 400 naming vitals.sbp, and stores nothing', async () => {
    const before = await countCases();
    const payload = preAlert({ clinical: { ageYears: 34, fall: { heightM: 4 }, vitals: { sbp: 400 } } });
    const answer = await submit(payload);
    expect(answer).toEqual({ ok: false, error: { code: 'invalid', message: 'clinical.vitals.sbp: must be at most 300', field: 'clinical.vitals.sbp', issues: [{ field: 'clinical.vitals.sbp', message: 'must be at most 300' }] } });
    expect(await countCases()).toBe(before);
    expect(await server.db('cases').where({ client_id: payload.clientId }).first()).toBeUndefined();
  });

  it('refuses an unknown clinical field by name with the nearest known one, and stores nothing', async () => {
    // One strict input (SOURCES.md §10) [ours]: "SBP" is never read as "no SBP recorded".
    const before = await countCases();
    const sbp = await submit(preAlert({ clinical: { ageYears: 34, fall: { heightM: 4 }, SBP: 70 } }));
    expect(sbp).toEqual({ ok: false, error: {
      code: 'invalid', message: 'unknown field clinical.SBP; did you mean clinical.vitals.sbp?', field: 'clinical.SBP',
      issues: [{ field: 'clinical.SBP', message: 'unknown field clinical.SBP; did you mean clinical.vitals.sbp?' }],
    } });
    const head = await submit(preAlert({ clinical: { ageYears: 34, fall: { heightM: 4, headimpact: true } } }));
    expect(head.ok === false && head.error.message).toBe('unknown field clinical.fall.headimpact; did you mean clinical.fall.headImpact?');
    // Unique catalogue ids only, no more than the catalogue holds (10,000 entries fit in one socket
    // message; the unit tests try 110,000 against the schema itself).
    const flood = await submit(preAlert({ clinical: { ageYears: 34, fall: { heightM: 4 }, findings: Array(10_000).fill('pelvic-fracture') } }));
    expect(flood.ok === false && flood.error.field).toBe('clinical.findings');
    const twice = await submit(preAlert({ clinical: { ageYears: 34, fall: { heightM: 4 }, considerations: ['burns', 'burns'] } }));
    expect(twice.ok === false && twice.error.message).toBe('clinical.considerations: must list each id at most once');
    // A pregnancy for a patient recorded male (SOURCES.md §2.6) [ours].
    const male = await submit(preAlert({ clinical: { ageYears: 34, sex: 'male', pregnancyWeeks: 24, fall: { heightM: 4 } } }));
    expect(male.ok === false && male.error.field).toBe('clinical.pregnancyWeeks');
    expect(await countCases()).toBe(before);
  });

  it('refuses a pre-alert without an age, and one without a client id, naming the field', async () => {
    const noAge = await submit(preAlert({ clinical: { fall: { heightM: 2 } } }));
    expect(noAge.ok === false && [noAge.error.field, noAge.error.message]).toEqual(['clinical.ageYears', 'clinical.ageYears: is required']);
    const { clientId: _dropped, ...noId } = preAlert();
    const noClientId = await submit(noId);
    expect(noClientId.ok === false && noClientId.error.field).toBe('clientId');
  });

  it('refuses a destination the agency does not serve, and a unit of another agency', async () => {
    const before = await countCases();
    const outsiderUnit = (await server.db('units').where({ call_sign: 'Valley 2' }).first('id')).id;
    const toGeneral = await submit(preAlert(), outsiderCrew);
    expect(toGeneral.ok === false && [toGeneral.error.code, toGeneral.error.field]).toEqual(['invalid', 'hospitalId']);
    const wrongUnit = await submit(preAlert({ unitId: outsiderUnit }));
    expect(wrongUnit.ok === false && [wrongUnit.error.code, wrongUnit.error.field]).toEqual(['invalid', 'unitId']);
    expect(await countCases()).toBe(before);
  });

  it('refuses a pre-alert from a charge nurse', async () => {
    const answer = await submit(preAlert(), board);
    expect(answer.ok === false && answer.error.code).toBe('forbidden');
  });
});

describe('reading cases', () => {
  it('the paramedic’s list has their agency’s open cases; another agency’s paramedic sees none of them and is refused the case (403)', async () => {
    const { caseId, caseNumber } = await submitted();
    const mine = (await (await medic.get('/api/cases')).json()) as { cases: CaseSummary[] };
    expect(mine.cases.map((c) => c.caseNumber)).toContain(caseNumber);
    expect(new Set(mine.cases.map((c) => c.agency.name))).toEqual(new Set(['Alderwick County Ambulance Service']));
    const theirs = (await (await outsider.get('/api/cases')).json()) as { cases: CaseSummary[] };
    expect(theirs.cases).toEqual([]);
    expect((await outsider.get(`/api/cases/${caseId}`)).status).toBe(403);
    expect((await medic.get(`/api/cases/${caseId}`)).status).toBe(200);
    expect((await medic.get('/api/cases/999999')).status).toBe(404);
  });

  it('another agency’s paramedic cannot update, cancel or redirect the case, and it stays as it was', async () => {
    const { caseId } = await submitted();
    const update = await command(outsiderCrew, 'case:update', { caseId, clinical: { ageYears: 34, fall: { heightM: 4 }, vitals: { sbp: 70 } } });
    const cancel = await command(outsiderCrew, 'case:cancel', { caseId, reason: 'not ours to cancel' });
    const redirect = await command(outsiderCrew, 'case:redirect', { caseId, hospitalId: community, reason: 'not ours to redirect' });
    expect([update, cancel, redirect].map((a) => (a.ok ? 'ok' : a.error.code))).toEqual(['forbidden', 'forbidden', 'forbidden']);
    const row = await server.db('cases').where({ id: caseId }).first('state', 'current_revision', 'recommended_level', 'hospital_id');
    expect(row).toEqual({ state: 'en-route', current_revision: 1, recommended_level: 'consult', hospital_id: general });
  });
});

describe('updates en route', () => {
  it('SBP falling from 120 to 84 re-evaluates to high risk and a full team, flags the rise, and keeps the first report', async () => {
    const payload = preAlert();
    const { caseId } = await submitted(payload);
    const heard = nextEvent<[CaseSummary, { kind: string; rose?: boolean; by: string | null }]>(board, 'case:updated');
    const clinical = { ...payload.clinical, vitals: { sbp: 84, hr: 118, rr: 24 } };
    const answer = await command<{ summary: CaseSummary; rose: boolean }>(crew, 'case:update', { caseId, etaMinutes: 9, clinical });
    expect(answer.ok).toBe(true);
    if (!answer.ok) return;
    // SBP 84 < 90 at age 34 and HR 118 > SBP 84 [source: Newgard 2022] → high; SBP < 90 at ≥ 10 calls full [ours: example policy].
    expect(answer.data.rose).toBe(true);
    expect(answer.data.summary).toMatchObject({ revision: 2, fieldRisk: 'high', recommendedLevel: 'full', levelRose: true });
    expect(answer.data.summary.firstVitals).toEqual({ sbp: 120, hr: 88, rr: 18 });
    expect(answer.data.summary.latest.result.criteria.map((c) => c.id)).toEqual([
      'field-2021:sbp-below-90-age-10-64',
      'field-2021:hr-above-sbp-age-10-up',
      'field-2021:fall-above-10-ft',
      'policy:sbp-below-90-age-10-up',
    ]);
    const [summary, change] = await heard;
    expect([summary.id, change.kind, change.rose, change.by]).toEqual([caseId, 'revised', true, 'Robin Vasquez-Hale']);
    const detail = await (await medic.get(`/api/cases/${caseId}`)).json();
    expect(detail.revisions.map((r: { revision: number; input: { vitals: { sbp: number } }; result: { activation: string } }) => [r.revision, r.input.vitals.sbp, r.result.activation])).toEqual([
      [1, 120, 'consult'],
      [2, 84, 'full'],
    ]);
    expect(detail.events.map((e: { kind: string }) => e.kind)).toEqual(['received', 'revised']);
  });

  it('an update that lowers the level is not flagged as a rise', async () => {
    const payload = preAlert({ clinical: { ageYears: 34, fall: { heightM: 4 }, vitals: { sbp: 84 } } });
    const { caseId } = await submitted(payload);
    const answer = await command<{ summary: CaseSummary; rose: boolean }>(crew, 'case:update', { caseId, clinical: { ageYears: 34, fall: { heightM: 4 }, vitals: { sbp: 118, hr: 90 } } });
    expect(answer.ok && [answer.data.rose, answer.data.summary.recommendedLevel, answer.data.summary.levelRose]).toEqual([false, 'consult', false]);
  });

  it('a bad update names the field and leaves the case at its last good revision', async () => {
    const { caseId } = await submitted();
    const answer = await command(crew, 'case:update', { caseId, clinical: { ageYears: 34, fall: { heightM: 4 }, vitals: { spo2: 140 } } });
    expect(answer.ok === false && [answer.error.code, answer.error.field]).toEqual(['invalid', 'clinical.vitals.spo2']);
    expect(await server.db('cases').where({ id: caseId }).first('current_revision')).toEqual({ current_revision: 1 });
  });
});

describe('cancel and redirect', () => {
  it('cancel needs a reason; once cancelled the case takes no more updates', async () => {
    const { caseId } = await submitted();
    const short = await command(crew, 'case:cancel', { caseId, reason: 'x' });
    expect(short.ok === false && [short.error.field, short.error.message]).toEqual(['reason', 'reason: needs a few words']);
    const heard = nextEvent<[CaseSummary, { kind: string }]>(board, 'case:updated');
    const done = await command<{ summary: CaseSummary }>(crew, 'case:cancel', { caseId, reason: 'Patient refused transport' });
    expect(done.ok && [done.data.summary.state, done.data.summary.cancelReason]).toEqual(['cancelled', 'Patient refused transport']);
    expect((await heard)[1].kind).toBe('cancelled');
    const late = await command(crew, 'case:update', { caseId, clinical: { ageYears: 34, fall: { heightM: 4 } } });
    expect(late.ok === false && late.error.code).toBe('conflict');
  });

  it('redirect moves the case to Fenmoor, tells Alderwick it left, and re-evaluates there', async () => {
    const { caseId, caseNumber } = await submitted();
    const removed = nextEvent<[{ id: number; caseNumber: string; reason: string }]>(board, 'case:removed');
    const same = await command(crew, 'case:redirect', { caseId, hospitalId: general, reason: 'already going there' });
    expect(same.ok === false && same.error.field).toBe('hospitalId');
    const answer = await command<{ summary: CaseSummary }>(crew, 'case:redirect', { caseId, hospitalId: community, reason: 'Road closed at the bridge' });
    expect(answer.ok && [answer.data.summary.hospital.name, answer.data.summary.state, answer.data.summary.revision, answer.data.summary.recommendedLevel]).toEqual(['Fenmoor Community Hospital', 'en-route', 2, 'consult']);
    expect((await removed)[0]).toEqual({ id: caseId, caseNumber, reason: 'Redirected to Fenmoor Community Hospital: Road closed at the bridge' });
  });
});
