import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { CaseSummary } from '../../shared/schemas/cases';
import { DEFAULT_CREW_COMMAND_LIMITS } from '../../server/limits';
import { startTestServer, type TestServer } from '../support/server';
import { signIn, type SignedInClient } from '../support/sign-in';
import { command, connectAs, nextEvent, type TestSocket } from '../support/socket';

// One account floods the pre-alert command, as a stuck or hostile device would. The limits refuse
// the flood with a message the crew can read and a time to wait, and a real patient sent a moment
// later from another crew's account still reaches the board.

const PASSWORD = 'a-long-test-password';
const { perAccountPerMinute, perUnitPerMinute } = DEFAULT_CREW_COMMAND_LIMITS;
// A ground-level fall on an anticoagulant at 81: the older-adult and anticoagulant considerations of
// the 2021 field-triage guideline [source: Newgard 2022].
const floodPatient = { ageYears: 81, sex: 'female', anticoagulant: true, fall: { heightM: 0, headImpact: true } };
// A fall from 9 m with a systolic pressure of 80: SBP < 90 at age 10–64 is high risk in the 2021
// guideline [source: Newgard 2022], full under the example policy: the case that must never be hidden.
const realPatient = { ageYears: 34, sex: 'male', fall: { heightM: 9, surface: 'concrete' }, vitals: { sbp: 80, hr: 128, gcsTotal: 9 } };

let server: TestServer;
let ids: { general: number; agency: number; unit: number; otherUnit: number };
const sockets: TestSocket[] = [];

async function crewAccount(email: string): Promise<SignedInClient> {
  const admin = await signIn(server.url, 'admin@plumbline.test');
  const created = await admin.send('POST', '/api/people/users', { email, name: email.split('@')[0], roles: ['paramedic'], memberships: [{ kind: 'agency', id: ids.agency }] });
  expect(created.status).toBe(201);
  expect((await admin.send('POST', `/api/people/users/${(await created.json()).id}/password`, { password: PASSWORD })).status).toBe(200);
  return signIn(server.url, email, PASSWORD);
}

async function open(client: SignedInClient): Promise<TestSocket> {
  const socket = await connectAs(server.url, client);
  sockets.push(socket);
  return socket;
}

beforeAll(async () => {
  server = await startTestServer();
  const db = server.db;
  const agency = (await db('agencies').where({ name: 'Alderwick County Ambulance Service' }).first('id')).id;
  const [unit, otherUnit] = (await db('units').where({ agency_id: agency, active: true }).orderBy('id').limit(2).pluck('id')) as number[];
  ids = { general: (await db('hospitals').where({ short_name: 'Alderwick General' }).first('id')).id, agency, unit, otherUnit };
}, 60_000);
afterAll(async () => {
  sockets.forEach((s) => s.close());
  await server?.close();
});

describe('a flood of pre-alerts from one account', () => {
  it('is cut off at the account’s limit with a clear refusal, and a later real patient from another account shows on the board', async () => {
    const flooder = await open(await signIn(server.url, 'paramedic@plumbline.test'));
    const casesBefore = Number((await server.db('cases').count({ n: '*' }).first())!.n);
    const answers = [];
    // 700, as the flood that once pushed a real patient off the board; sent without waiting.
    for (let i = 0; i < 700; i++) answers.push(command(flooder, 'case:submit', { clientId: randomUUID(), hospitalId: ids.general, clinical: floodPatient }));
    const settled = await Promise.all(answers);
    const accepted = settled.filter((a) => a.ok).length;
    const refused = settled.filter((a) => !a.ok);
    expect(accepted).toBe(perAccountPerMinute);
    expect(refused).toHaveLength(700 - perAccountPerMinute);
    const first = refused[0] as { ok: false; error: { code: string; message: string; retryAfterMs?: number } };
    expect(first.error.code).toBe('rate_limited');
    expect(first.error.message).toMatch(/^Too many pre-alerts and updates from your account \(at most 30 a minute\)\. It is kept on this device and sent again in \d+ s\.$/);
    expect(first.error.retryAfterMs).toBeGreaterThan(0);
    expect(first.error.retryAfterMs).toBeLessThanOrEqual(60_000);
    expect(Number((await server.db('cases').count({ n: '*' }).first())!.n)).toBe(casesBefore + perAccountPerMinute);
    // Updates count against the same limit: the flooding account cannot switch to them.
    const anyCase = (settled.find((a) => a.ok) as { ok: true; data: { caseId: number } }).data.caseId;
    expect(await command(flooder, 'case:update', { caseId: anyCase, clinical: floodPatient })).toMatchObject({ ok: false, error: { code: 'rate_limited' } });

    const nurse = await signIn(server.url, 'nurse@plumbline.test');
    const board = await open(nurse);
    const colleague = await open(await crewAccount('second.crew@plumbline.test'));
    const heard = nextEvent<[CaseSummary]>(board, 'case:submitted', 5000);
    const real = await command<{ caseId: number; summary: CaseSummary }>(colleague, 'case:submit', { clientId: randomUUID(), hospitalId: ids.general, etaMinutes: 8, clinical: realPatient });
    expect(real.ok).toBe(true);
    const caseId = real.ok ? real.data.caseId : -1;
    expect(real.ok && real.data.summary.recommendedLevel).toBe('full');
    expect((await heard)[0].id).toBe(caseId);
    const shown = (await (await nurse.get(`/api/board?hospitalId=${ids.general}`)).json()) as { cases: CaseSummary[] };
    expect(shown.cases.map((c) => c.id)).toContain(caseId);
  }, 60_000);

  it('limits one unit whoever signs in on it, and leaves other units alone', async () => {
    const [a, b] = [await open(await crewAccount('unit.crew.a@plumbline.test')), await open(await crewAccount('unit.crew.b@plumbline.test'))];
    const answers = [];
    // Two accounts on one ambulance, each well inside its own account's limit.
    for (let i = 0; i < perUnitPerMinute + 4; i++) answers.push(await command(i % 2 ? b : a, 'case:submit', { clientId: randomUUID(), hospitalId: ids.general, unitId: ids.unit, clinical: floodPatient }));
    expect(answers.filter((x) => x.ok)).toHaveLength(perUnitPerMinute);
    expect(answers.at(-1)).toMatchObject({ ok: false, error: { code: 'rate_limited', message: expect.stringMatching(/^Too many pre-alerts and updates from this unit/) } });
    expect(await command(a, 'case:submit', { clientId: randomUUID(), hospitalId: ids.general, unitId: ids.otherUnit, clinical: floodPatient })).toMatchObject({ ok: true });
  }, 60_000);
});
