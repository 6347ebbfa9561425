import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import twilio from 'twilio';
import type { CaseSummary } from '../../shared/schemas/cases';
import type { PagingPlan, PagingStatus } from '../../shared/schemas/paging';
import { runRepaging } from '../../server/services/jobs/repaging';
import { providerSignature } from '../../server/sms/signature';
import { RedirectingRequestClient } from '../../server/sms/sdk';
import type { SmsFake } from '../../server/sms/fake';
import { startTestServer, type TestServer } from '../support/server';
import { signIn, type SignedInClient } from '../support/sign-in';
import { command, connectAs, nextEvent, type TestSocket } from '../support/socket';
import { until } from '../support/until';

// The real SDK (twilio) talks HTTP to the in-process fake of the provider's REST API; the fake
// calls our webhooks back, signed as the provider signs. The server's clock is a fake the test
// moves for the re-paging tiers; the fake's own delivery steps run on real timers.
const clock = { t: Date.UTC(2026, 11, 14, 9, 0, 0), now() { return this.t; } };
const MIN = 60_000;

// Numbers from the Australian range set aside for fiction (ACMA: 0491 570 006, 156, 157…; from
// memory), so none is anyone's phone, and valid to the numbering-plan check.
const LEAD_MOBILE = '+61491570156';
const QUALITY_MOBILE = '+61491570157';
const ON_CALL_MOBILE = '+61491570158';
const QUALITY_EMAIL = 'jules.pager@alderwick-general.plumbline.test';

// SBP 84 at 10–64 years is a high-risk criterion [source: Newgard 2022] → the example policy's full level.
const hypotensiveRoofer = { ageYears: 34, sex: 'male', fall: { heightM: 4, surface: 'concrete', firstImpact: 'back' }, vitals: { sbp: 84, hr: 120 } };

let server: TestServer;
let fake: SmsFake;
let admin: SignedInClient;
let nurse: SignedInClient;
let crew: TestSocket;
let board: TestSocket;
let general: number;
let lead: number;
let quality: number;

async function act(summary: CaseSummary, action: string, body: Record<string, unknown> = {}): Promise<CaseSummary> {
  const res = await nurse.send('POST', `/api/cases/${summary.id}/${action}`, { rowVersion: summary.rowVersion, ...body });
  const answer = await res.json();
  if (res.status !== 200) throw new Error(`${action}: ${res.status} ${JSON.stringify(answer)}`);
  return answer.case;
}

/** A case at Alderwick General, acknowledged, decided full, in a bay, and paged by the nurse. */
async function pagedCase(notes?: string): Promise<CaseSummary> {
  const answer = await command<{ summary: CaseSummary }>(crew, 'case:submit', { clientId: randomUUID(), hospitalId: general, etaMinutes: 12, clinical: hypotensiveRoofer, notes });
  if (!answer.ok) throw new Error(answer.error.message);
  let summary = await act(answer.data.summary, 'acknowledge');
  summary = await act(summary, 'decide', { level: 'full' });
  // Every case of this file goes to the same bay: the nurse confirms the double booking.
  summary = await act(summary, 'bay', { bay: 'Resus 4', confirmOccupied: true });
  return act(summary, 'page');
}

const smsTo = (caseId: number, to: string) => server.db('outbound_messages').where({ case_id: caseId, channel: 'sms', recipient: to }).orderBy('id').select('*');
const sentBodies = (to: string) => fake.messages.filter((m) => m.direction === 'outbound-api' && m.to === to).map((m) => m.body);

beforeAll(async () => {
  server = await startTestServer({}, { clock });
  fake = server.sms.fake!;
  general = (await server.db('hospitals').where({ name: 'Alderwick General Hospital' }).first('id')).id;
  lead = (await server.db('users').where({ email: 'lead@plumbline.test' }).first('id')).id;
  quality = (await server.db('users').where({ email: 'quality@plumbline.test' }).first('id')).id;
  admin = await signIn(server.url, 'admin@plumbline.test');
  nurse = await signIn(server.url, 'nurse@plumbline.test');
  crew = await connectAs(server.url, await signIn(server.url, 'paramedic@plumbline.test'));
  board = await connectAs(server.url, nurse);

  expect((await admin.send('PUT', `/api/paging/contacts/${lead}`, { email: null, mobile: LEAD_MOBILE })).status).toBe(200);
  expect((await admin.send('PUT', `/api/paging/contacts/${quality}`, { email: QUALITY_EMAIL, mobile: QUALITY_MOBILE })).status).toBe(200);
  const settings = await (await admin.get(`/api/paging/hospitals/${general}`)).json();
  const plan: PagingPlan = settings.plan;
  plan.levels.full = { minutes: 3, repeats: 1, tiers: [[{ kind: 'person', value: lead }, { kind: 'person', value: quality }], [{ kind: 'sms', value: ON_CALL_MOBILE }]] };
  plan.targetMinutes = 5;
  const saved = await admin.send('PUT', `/api/paging/hospitals/${general}/plan`, plan);
  expect(saved.status).toBe(200);
  // Jules's handset is off: every message to it ends undelivered.
  fake.unreachable.add(QUALITY_MOBILE);
});
afterAll(async () => {
  crew?.close();
  board?.close();
  await server?.close();
});

describe('settings: contacts and tiers', () => {
  it('refuses a mobile number that is not E.164 or not a real numbering plan, naming the field, and keeps the saved one', async () => {
    for (const mobile of ['07700 900123', '+44123']) {
      const res = await admin.send('PUT', `/api/paging/contacts/${lead}`, { email: null, mobile });
      const body = await res.json();
      expect([res.status, body.error.field]).toEqual([400, 'mobile']);
    }
    const people = (await (await admin.get(`/api/paging/hospitals/${general}`)).json()).people as Array<{ id: number; contact: { mobile: string } }>;
    expect(people.find((p) => p.id === lead)!.contact.mobile).toBe(LEAD_MOBILE);
  });

  it('keeps a nurse and another hospital out: only admins change paging, only members read a board', async () => {
    expect((await nurse.send('PUT', `/api/paging/contacts/${lead}`, { email: null, mobile: LEAD_MOBILE })).status).toBe(403);
    const fenmoorNurse = await signIn(server.url, 'fenmoor.nurse@plumbline.test');
    expect((await fenmoorNurse.get(`/api/paging/board?hospitalId=${general}`)).status).toBe(403);
    const unknownPerson = await admin.send('PUT', `/api/paging/hospitals/${general}/plan`, { ...(await (await admin.get(`/api/paging/hospitals/${general}`)).json()).plan, targetMinutes: 0 });
    expect([unknownPerson.status, (await unknownPerson.json()).error.field]).toEqual([400, 'targetMinutes']);
    // A person from elsewhere in a tier is refused by name of the entry, and the saved plan stays as it was.
    const stranger = (await server.db('users').where({ email: 'paramedic@plumbline.test' }).first('id')).id;
    const saved = (await (await admin.get(`/api/paging/hospitals/${general}`)).json()).plan as PagingPlan;
    const planted = structuredClone(saved);
    planted.levels.full.tiers[0].push({ kind: 'person', value: stranger });
    const refused = await admin.send('PUT', `/api/paging/hospitals/${general}/plan`, planted);
    expect([refused.status, (await refused.json()).error.field]).toEqual([400, 'levels.full.tiers[0][2]']);
    expect((await (await admin.get(`/api/paging/hospitals/${general}`)).json()).plan).toEqual(saved);
  });
});

describe('paging by SMS through the SDK and the fake, and what comes back', () => {
  let summary: CaseSummary;

  it('sends a short SMS with level, age and sex, mechanism, ETA, bay and case number, and no name', async () => {
    summary = await pagedCase('Patient name Ada Example');
    const [body] = await until(async () => sentBodies(LEAD_MOBILE), (b) => b.length > 0);
    expect(body).toMatch(new RegExp(`^FULL TRAUMA TEAM Alderwick General Hospital: 34-year-old male, fall 13\\.1 ft onto concrete, ETA \\d\\d:\\d\\d \\(12 min\\), Resus 4\\. Case ${summary.caseNumber}\\. Reply 1 on my way, 2 can't come\\.$`));
    expect(body).not.toContain('Ada');
    const [row] = await until(() => smsTo(summary.id, LEAD_MOBILE), (rows) => rows[0]?.provider_id != null);
    expect(row.provider_id).toMatch(/^SM[0-9a-f]{32}$/);
    expect(row.user_id).toBe(lead);
    const round = await server.db('case_events').where({ case_id: summary.id, kind: 'page-sms-sent' }).first('data', 'actor_role');
    expect(JSON.parse(round.data)).toMatchObject({ level: 'full', tier: 1, round: 1, sms: [LEAD_MOBILE, QUALITY_MOBILE] });
  });

  it('marks the message delivered from the signed status callbacks, each receipt audited', async () => {
    const [row] = await until(() => smsTo(summary.id, LEAD_MOBILE), (rows) => rows[0]?.state === 'delivered');
    expect(row.state).toBe('delivered');
    const receipts = await server.db('audit_log').where({ case_id: summary.id, action: 'case.page-receipt' }).select('after');
    const states = receipts.map((r) => JSON.parse(r.after)).filter((d) => d.to === LEAD_MOBILE).map((d) => d.state);
    expect(states).toEqual(['sent', 'delivered']);
  });

  it('falls back to e-mail when an SMS is undelivered, and tells the board', async () => {
    const told = nextEvent<[PagingStatus]>(board, 'paging:changed', 5000, (s) => s.caseId === summary.id && s.failures.some((f) => f.fellBackTo));
    const [failed] = await until(() => smsTo(summary.id, QUALITY_MOBILE), (rows) => rows[0]?.state === 'undelivered');
    expect(failed.error).toBe('provider error 30003');
    const [status] = await told;
    expect(status.failures).toEqual([expect.objectContaining({ recipient: QUALITY_MOBILE, name: 'Jules Oyelaran', fellBackTo: QUALITY_EMAIL })]);
    const mail = await server.db('mail_messages').where('subject', 'like', `SMS not delivered%case ${summary.caseNumber})`).first('recipients', 'text');
    expect(JSON.parse(mail.recipients)).toEqual([QUALITY_EMAIL]);
    expect(mail.text).toContain('Bay: Resus 4');
    const listed = await (await admin.get('/api/messages')).json();
    expect(listed.messages.find((m: { fallbackOf: number | null }) => m.fallbackOf === failed.id)).toMatchObject({ channel: 'email', recipient: QUALITY_EMAIL, state: 'sent' });
  });

  it('accepts a signed reply "1" as on my way, with the name and time on the board', async () => {
    const told = nextEvent<[PagingStatus]>(board, 'paging:changed', 5000, (s) => s.caseId === summary.id && s.replies.length > 0);
    clock.t += 2 * MIN;
    expect(await fake.reply(LEAD_MOBILE, '1')).toBe(200);
    const [status] = await told;
    expect(status.replies).toEqual([{ id: expect.any(Number), name: 'Dr. Sasha Imbert', answer: 'coming', text: '1', at: clock.t }]);
    const audit = await server.db('audit_log').where({ case_id: summary.id, action: 'case.page-reply' }).first('after', 'actor_id');
    expect([JSON.parse(audit.after).answer, audit.actor_id]).toEqual(['coming', lead]);
    const fromBoard = await (await nurse.get(`/api/paging/board?hospitalId=${general}`)).json();
    expect(fromBoard.find((s: PagingStatus) => s.caseId === summary.id).replies[0].name).toBe('Dr. Sasha Imbert');
    // The review's interval: page to first on my way, against the hospital's 5-minute target.
    const lead_ = await signIn(server.url, 'lead@plumbline.test');
    const intervals = await (await lead_.get(`/api/paging/intervals?hospitalId=${general}`)).json();
    expect(intervals.find((i: { caseId: number }) => i.caseId === summary.id)).toMatchObject({ minutes: 2, targetMinutes: 5, met: true });
  });

  it('refuses a forged or unsigned reply and a forged receipt, and records nothing', async () => {
    const url = `${server.url}/webhooks/sms/inbound`;
    const params = { AccountSid: fake.accountSid, Body: '2', From: LEAD_MOBILE, MessageSid: 'SM' + 'f'.repeat(32), To: server.sms.from };
    const post = (path: string, headers: Record<string, string>) => fetch(`${server.url}${path}`, { method: 'POST', headers: { 'content-type': 'application/x-www-form-urlencoded', ...headers }, body: new URLSearchParams(params).toString() });
    expect((await post('/webhooks/sms/inbound', {})).status).toBe(403);
    expect((await post('/webhooks/sms/inbound', { 'X-Twilio-Signature': providerSignature('not-the-secret', url, params) })).status).toBe(403);
    // Signed for other fields than those sent: the body was changed on the way.
    expect((await post('/webhooks/sms/inbound', { 'X-Twilio-Signature': providerSignature(fake.authToken, url, { ...params, Body: '1' }) })).status).toBe(403);
    expect((await post('/webhooks/sms/status', { 'X-Twilio-Signature': providerSignature('not-the-secret', `${server.url}/webhooks/sms/status`, params) })).status).toBe(403);
    expect(await server.db('page_replies').where({ case_id: summary.id }).count({ n: '*' }).first()).toEqual({ n: 1 });
    // The same request signed with the account's secret is what the provider sends: accepted.
    expect((await post('/webhooks/sms/inbound', { 'X-Twilio-Signature': providerSignature(fake.authToken, url, params) })).status).toBe(200);
    expect((await server.db('page_replies').where({ case_id: summary.id }).orderBy('id').select('answer')).map((r) => r.answer)).toEqual(['coming', 'declined']);
    // A replayed request (the provider retries, or someone resends a captured one) is answered but counted once.
    expect((await post('/webhooks/sms/inbound', { 'X-Twilio-Signature': providerSignature(fake.authToken, url, params) })).status).toBe(200);
    expect(await server.db('page_replies').where({ case_id: summary.id }).count({ n: '*' }).first()).toEqual({ n: 2 });
  });

  it('the SDK reports the provider\'s own error for a number it cannot send to', async () => {
    await expect(server.sms.send('+4412', 'test', `${server.url}/webhooks/sms/status`)).rejects.toMatchObject({ status: 400, code: 21211 });
    // Basic auth with the wrong secret: the provider's 401 and its error code, through the same SDK option.
    const wrongSecret = twilio(fake.accountSid, 'not-the-secret', { httpClient: new RedirectingRequestClient(fake.url) });
    await expect(wrongSecret.messages.create({ to: LEAD_MOBILE, from: server.sms.from, body: 'test' })).rejects.toMatchObject({ status: 401, code: 20003 });
  });
});

describe('re-paging in tiers when nobody answers', () => {
  it('repeats tier 1 after the minutes, escalates to tier 2, repeats it and stops there, and leaves an answered case alone', async () => {
    const answered = (await server.db('page_replies').where({ answer: 'coming' }).first('case_id')).case_id;
    // The demo's paged cases nobody answered run through their tiers first, so only this case is left.
    for (let i = 0; i < 10 && (await runRepaging(server.deps)).length; i++) clock.t += 10 * MIN;
    const summary = await pagedCase();
    const before = sentBodies(ON_CALL_MOBILE).length;
    const leadCount = () => sentBodies(LEAD_MOBILE).filter((b) => b.includes(summary.caseNumber)).length;
    await until(async () => leadCount(), (n) => n === 1);

    clock.t += 3 * MIN - 1000;
    expect(await runRepaging(server.deps)).toEqual([]);
    clock.t += 1000;
    expect(await runRepaging(server.deps)).toEqual([summary.id]);
    expect(sentBodies(LEAD_MOBILE).at(-1)).toMatch(new RegExp(`^REPEAT 2 FULL TRAUMA TEAM .*Case ${summary.caseNumber}\\.`));
    expect(leadCount()).toBe(2);
    // The repeat of tier 1 also mails the level's own list again.
    const repeatMail = await server.db('mail_messages').where('subject', 'like', `Repeat 2:%case ${summary.caseNumber})`).first('recipients');
    expect(JSON.parse(repeatMail.recipients)).toContain('trauma-full@alderwick-general.plumbline.test');

    clock.t += 3 * MIN;
    expect(await runRepaging(server.deps)).toEqual([summary.id]);
    expect(sentBodies(ON_CALL_MOBILE).slice(before)).toEqual([expect.stringMatching(new RegExp(`^ESCALATED \\(tier 2\\) FULL TRAUMA TEAM .*Case ${summary.caseNumber}\\.`))]);

    // The last tier repeats as often as the others, then the paging stops: the board shows nobody is coming.
    clock.t += 3 * MIN;
    expect(await runRepaging(server.deps)).toEqual([summary.id]);
    expect(sentBodies(ON_CALL_MOBILE).at(-1)).toMatch(/^ESCALATED \(tier 2, repeat 2\) /);
    clock.t += 3 * MIN;
    expect(await runRepaging(server.deps)).toEqual([]);
    expect(leadCount()).toBe(2);
    expect(sentBodies(ON_CALL_MOBILE).slice(before)).toHaveLength(2);
    expect(await server.db('page_rounds').where({ case_id: answered }).count({ n: '*' }).first()).toEqual({ n: 1 });
    const kinds = (await server.db('case_events').where({ case_id: summary.id }).whereLike('kind', 'page-%').orderBy('id').select('kind')).map((r) => r.kind);
    expect(kinds.filter((k) => k !== 'page-receipt')).toEqual(['page-sms-sent', 'page-repeated', 'page-escalated', 'page-repeated']);
  });
});
