import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { CaseSummary } from '../../shared/schemas/cases';
import { runEscalation } from '../../server/services/jobs/escalation';
import { startTestServer, type TestServer } from '../support/server';
import { signIn, type SignedInClient } from '../support/sign-in';
import { command, connectAs, nextEvent, type TestSocket } from '../support/socket';

// The server's own clock is a fake the test moves; the background job reads the same clock, so
// whichever of the job and the test looks first, the result in the database is the same.
const clock = { t: Date.UTC(2026, 11, 14, 3, 0, 0), now() { return this.t; } };
const MIN = 60_000;
// The test server's hospitals keep their times in UTC (the setting below), shown as "03:15 UTC".
const hhmm = (at: number) => `${String(new Date(at).getUTCHours()).padStart(2, '0')}:${String(new Date(at).getUTCMinutes()).padStart(2, '0')} UTC`;

let server: TestServer;
let nurse: SignedInClient;
let crew: TestSocket;
let board: TestSocket;
let general: number;
let fenmoor: number;

// A fall over 10 ft is 2021 moderate risk [source: Newgard 2022] → the example policy's consult.
const ladderFall = { ageYears: 50, sex: 'female', fall: { heightM: 3.5, surface: 'grass' }, vitals: { sbp: 130, hr: 80 } };

async function submit(hospitalId: number): Promise<CaseSummary> {
  const answer = await command<{ summary: CaseSummary }>(crew, 'case:submit', { clientId: randomUUID(), hospitalId, etaMinutes: 15, clinical: ladderFall });
  if (!answer.ok) throw new Error(answer.error.message);
  return answer.data.summary;
}

const overdueAt = async (id: number) => (await server.db('cases').where({ id }).first('overdue_at')).overdue_at;
const escalationMails = (caseNumber: string) => server.db('mail_messages').where('subject', 'like', `Not acknowledged%case ${caseNumber})`).select('recipients', 'subject', 'text');

beforeAll(async () => {
  server = await startTestServer({}, { clock });
  await server.db('settings').insert({ hospital_id: 0, key: 'hospital.timeZone', value: JSON.stringify('UTC') });
  const hospitals = await server.db('hospitals').select('id', 'name');
  general = hospitals.find((h) => h.name === 'Alderwick General Hospital')!.id;
  fenmoor = hospitals.find((h) => h.name === 'Fenmoor Community Hospital')!.id;
  // Clear the demo's live cases first, so each test sees only its own case escalate.
  clock.t += 60 * MIN;
  await runEscalation(server.deps);
  nurse = await signIn(server.url, 'nurse@plumbline.test');
  crew = await connectAs(server.url, await signIn(server.url, 'paramedic@plumbline.test'));
  board = await connectAs(server.url, nurse);
});
afterAll(async () => {
  crew?.close();
  board?.close();
  await server?.close();
});

describe('escalation of a pre-alert nobody acknowledges', () => {
  it('at Alderwick General (2 minutes): not at 1:59, overdue at 2:00 with one e-mail to the escalation list and the board told', async () => {
    const summary = await submit(general);
    clock.t += 2 * MIN - 1000;
    await runEscalation(server.deps);
    expect(await overdueAt(summary.id)).toBeNull();

    clock.t += 1000;
    const told = nextEvent<[CaseSummary, { kind: string; by: string | null }]>(board, 'case:updated', 2000);
    await runEscalation(server.deps);
    expect(Number(await overdueAt(summary.id))).toBe(summary.createdAt + 2 * MIN);
    const [seen, change] = await told;
    expect([seen.id, seen.overdueAt, change.kind, change.by]).toEqual([summary.id, summary.createdAt + 2 * MIN, 'overdue', null]);

    const mails = await escalationMails(summary.caseNumber);
    expect(mails).toHaveLength(1);
    expect(JSON.parse(mails[0].recipients)).toEqual(['ed-nurse-in-charge@alderwick-general.plumbline.test']);
    expect(mails[0].subject).toBe(`Not acknowledged after 2 min: Trauma consult recommended, ETA ${hhmm(summary.etaAt!)} (in 13 min) (Alderwick General Hospital, case ${summary.caseNumber})`);
    expect(mails[0].text).toContain('has not been acknowledged on the Inbound board for 2 minutes');
    expect(mails[0].text).toContain('Patient: 50-year-old female');

    // Looking again before the next step sends nothing more: one step, one notice.
    clock.t += 1 * MIN;
    await runEscalation(server.deps);
    expect(await escalationMails(summary.caseNumber)).toHaveLength(1);
    const event = await server.db('case_events').where({ case_id: summary.id, kind: 'overdue' }).select('actor_role');
    expect(event).toEqual([{ actor_role: 'system' }]);
  });

  it('an acknowledged case is never escalated', async () => {
    const summary = await submit(general);
    clock.t += 30_000;
    const res = await nurse.send('POST', `/api/cases/${summary.id}/acknowledge`, { rowVersion: summary.rowVersion });
    expect(res.status).toBe(200);
    clock.t += 10 * MIN;
    await runEscalation(server.deps);
    expect(await overdueAt(summary.id)).toBeNull();
    expect(await escalationMails(summary.caseNumber)).toHaveLength(0);
  });

  it('follows each hospital’s own setting: Fenmoor Community escalates at 3 minutes, and a changed setting counts at once', async () => {
    const summary = await submit(fenmoor);
    clock.t += 2 * MIN + 30_000;
    await runEscalation(server.deps);
    expect(await overdueAt(summary.id)).toBeNull();
    clock.t += 30_000;
    await runEscalation(server.deps);
    expect(Number(await overdueAt(summary.id))).toBe(summary.createdAt + 3 * MIN);
    expect(JSON.parse((await escalationMails(summary.caseNumber))[0].recipients)).toEqual(['ed-senior@fenmoor-community.plumbline.test']);

    await server.db('hospitals').where({ id: general }).update({ escalation_minutes: 5 });
    try {
      const slow = await submit(general);
      clock.t += 4 * MIN;
      await runEscalation(server.deps);
      expect(await overdueAt(slow.id)).toBeNull();
      clock.t += MIN;
      await runEscalation(server.deps);
      expect(Number(await overdueAt(slow.id))).toBe(slow.createdAt + 5 * MIN);
    } finally {
      await server.db('hospitals').where({ id: general }).update({ escalation_minutes: 2 });
    }
  });

  it('an overdue case still shows overdue on the board until someone acknowledges it', async () => {
    const summary = await submit(general);
    clock.t += 3 * MIN;
    await runEscalation(server.deps);
    const onBoard = async () => (await (await nurse.get('/api/board')).json()).cases.find((c: CaseSummary) => c.id === summary.id) as CaseSummary;
    const overdue = await onBoard();
    expect([overdue.overdueAt, overdue.acknowledgedAt]).toEqual([summary.createdAt + 3 * MIN, null]);
    const res = await nurse.send('POST', `/api/cases/${summary.id}/acknowledge`, { rowVersion: overdue.rowVersion });
    expect(res.status).toBe(200);
    expect((await onBoard()).acknowledgedAt).toBe(clock.t);
  });
});

describe('escalation in steps, and digests when many wait at once', () => {
  const seniorMails = () => server.db('mail_messages').where('recipients', 'like', '%ed-consultant-on-call@alderwick-general%').select('subject', 'text', 'recipients');

  it('a case still unacknowledged at twice the minutes goes to the senior list, the ETA reads as passed, and each step is audited', async () => {
    const before = (await seniorMails()).length;
    const summary = await submit(general);
    clock.t += 2 * MIN;
    await runEscalation(server.deps);
    expect((await seniorMails()).length).toBe(before);
    clock.t += 2 * MIN;
    await runEscalation(server.deps);
    const senior = (await seniorMails()).filter((m) => m.subject.includes(summary.caseNumber));
    expect(senior).toHaveLength(1);
    expect(senior[0].subject).toBe(`Not acknowledged after 4 min: Trauma consult recommended, ETA ${hhmm(summary.etaAt!)} (in 11 min) (Alderwick General Hospital, case ${summary.caseNumber})`);
    expect(senior[0].text).toContain('Escalation step 2.');
    const steps = await server.db('case_events').where({ case_id: summary.id }).whereIn('kind', ['overdue', 'escalated']).orderBy('id').select('kind', 'data', 'actor_role');
    expect(steps.map((e) => [e.kind, JSON.parse(e.data).step, JSON.parse(e.data).list, e.actor_role])).toEqual([
      ['overdue', 1, 'escalation', 'system'],
      ['escalated', 2, 'senior', 'system'],
    ]);
    expect(await server.db('audit_log').where({ case_id: summary.id, action: 'case.escalated' }).count({ n: '*' }).first()).toEqual({ n: 1 });

    // Past the ETA the notice says so in words, not "in 0 min".
    clock.t += 30 * MIN;
    const late = (await import('../../server/services/board/paging')).etaLine({ arrivedAt: null, etaAt: summary.etaAt }, clock.t, (at) => hhmm(at));
    expect(late).toBe(`ETA passed 19 min ago (${hhmm(summary.etaAt!)})`);
    await nurse.send('POST', `/api/cases/${summary.id}/acknowledge`, { rowVersion: (await server.db('cases').where({ id: summary.id }).first('row_version')).row_version });
  });

  it('twelve cases overdue at once at one hospital make one digest to the escalation list, most urgent first, not twelve e-mails', async () => {
    const countMails = async () => Number((await server.db('mail_messages').count({ n: '*' }).first())!.n);
    const cases: CaseSummary[] = [];
    for (let i = 0; i < 12; i++) cases.push(await submit(general));
    const before = await countMails();
    clock.t += 2 * MIN;
    await runEscalation(server.deps);
    expect(await countMails()).toBe(before + 1);
    const digest = await server.db('mail_messages').orderBy('id', 'desc').first('subject', 'text', 'recipients');
    expect(digest.subject).toBe('Not acknowledged: 12 pre-alerts waiting (Alderwick General Hospital, escalation step 1)');
    for (const c of cases) expect(digest.text).toContain(`Case ${c.caseNumber}:`);
    expect(JSON.parse(digest.recipients)).toEqual(['ed-nurse-in-charge@alderwick-general.plumbline.test']);
    // Every case's own step is still audited on the case.
    for (const c of cases) expect(await server.db('case_events').where({ case_id: c.id, kind: 'overdue' }).count({ n: '*' }).first()).toEqual({ n: 1 });
  });
});
