import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { csvCell, toCsv } from '../../server/services/quality/csv';
import type { Mailer } from '../../server/mail';
import { startTestServer, type TestServer } from '../support/server';
import { signIn, type SignedInClient } from '../support/sign-in';
import { command, connectAs, type TestSocket } from '../support/socket';

// The Activation review screen's server side, on a fixed set of June and July 2027 cases built
// through the real crew and board actions at chosen times; the demo scenario sits months
// earlier, so every list below is filtered to the test's own months.

const MIN = 60_000;
const t = (iso: string) => Date.parse(iso);
let now = t('2027-03-01T08:00:00Z');
const clock = { now: () => now };
const quietMailer: Mailer = { local: false, send: async () => ({ messageId: 'test' }), close: async () => {} };

// Example policy (SOURCES.md §6 [ours]) on the 2021 guideline criteria (Newgard 2022 [source]).
const CLINICAL = {
  // SBP 84 < 90 at age 10–64: full.
  full: { ageYears: 34, sex: 'male', fall: { heightM: 4 }, vitals: { sbp: 84, hr: 120 } },
  // Fall of 7 m (> 20 ft), vitals normal: limited.
  limited: { ageYears: 41, sex: 'female', fall: { heightM: 7 }, vitals: { sbp: 130, hr: 88, rr: 16, spo2: 98, spo2RoomAir: true, gcs: { eye: 4, verbal: 5, motor: 6 } } },
  // 72-year-old, fall from standing, on an anticoagulant: consult.
  consult: { ageYears: 72, sex: 'female', anticoagulant: true, fall: { heightM: 0, headImpact: false }, vitals: { sbp: 140, hr: 80, rr: 16, spo2: 97, spo2RoomAir: true, gcs: { eye: 4, verbal: 5, motor: 6 } } },
  // 30-year-old, fall from standing, nothing found: no activation.
  none: { ageYears: 30, sex: 'male', anticoagulant: false, pregnancyWeeks: null, fall: { heightM: 0, headImpact: false }, vitals: { sbp: 128, hr: 76, rr: 14, spo2: 99, spo2RoomAir: true, gcs: { eye: 4, verbal: 5, motor: 6 } }, findings: [], considerations: [] },
} as const;

let server: TestServer;
let crew: TestSocket;
let nurse: SignedInClient;
let lead: SignedInClient;
let quality: SignedInClient;
let admin: SignedInClient;
let paramedic: SignedInClient;
let general: number;
let fenmoor: number;
const cases: Record<string, number> = {};

async function submit(level: keyof typeof CLINICAL, at: number, hospitalId = general): Promise<number> {
  now = at;
  const answer = await command<{ caseId: number }>(crew, 'case:submit', { clientId: randomUUID(), hospitalId, etaMinutes: 15, clinical: CLINICAL[level] });
  if (!answer.ok) throw new Error(answer.error.message);
  return answer.data.caseId;
}

/** One board action at a chosen time, with the version the board shows (read fresh, as a board would). */
async function act(caseId: number, action: string, at: number, body: Record<string, unknown> = {}): Promise<void> {
  now = at;
  for (let attempt = 0; attempt < 2; attempt++) {
    const { rowVersion } = (await server.db('cases').where({ id: caseId }).first('row_version as rowVersion')) as { rowVersion: number };
    const res = await nurse.send('POST', `/api/cases/${caseId}/${action}`, { rowVersion, ...body });
    if (res.ok) return;
    // The escalation job may have touched the case between our read and the post.
    if (res.status !== 409 || attempt === 1) throw new Error(`${action} on case ${caseId}: ${res.status} ${await res.text()}`);
  }
}

/** Pre-alert at `start`; acknowledged after `ackMin`; decided; arrived after 30 min; team after `teamMin` (null: never recorded); closed. */
async function handled(level: keyof typeof CLINICAL, start: string, o: { ackMin?: number; decide?: string; reason?: string; teamMin?: number | null; close?: boolean } = {}): Promise<number> {
  const begin = t(start);
  const id = await submit(level, begin);
  await act(id, 'acknowledge', begin + (o.ackMin ?? 1) * MIN);
  if (o.decide) await act(id, 'decide', begin + (o.ackMin ?? 1) * MIN + 30_000, { level: o.decide, ...(o.reason ? { reason: o.reason } : {}) });
  const arrived = begin + 30 * MIN;
  await act(id, 'arrived', arrived);
  if (o.teamMin != null) await act(id, 'team-at-bedside', arrived + o.teamMin * MIN + 60 * MIN, { at: arrived + o.teamMin * MIN });
  if (o.close !== false) await act(id, 'close', arrived + 120 * MIN);
  return id;
}

const list = async (client: SignedInClient, query: string) => {
  const res = await client.get(`/api/review/cases?from=2027-06-01&to=2027-07-31&${query}`);
  expect(res.status, await res.clone().text()).toBe(200);
  return res.json() as Promise<{ rows: Array<{ caseNumber: string; id: number; [k: string]: unknown }>; total: number; page: number; pageSize: number }>;
};
const ids = (page: { rows: Array<{ id: number }> }) => page.rows.map((r) => r.id);

beforeAll(async () => {
  server = await startTestServer({}, { clock, mailer: quietMailer });
  general = (await server.db('hospitals').where({ short_name: 'Alderwick General' }).first('id')).id;
  fenmoor = (await server.db('hospitals').where({ short_name: 'Fenmoor Community' }).first('id')).id;
  [paramedic, nurse, lead, quality, admin] = await Promise.all(
    ['paramedic', 'nurse', 'lead', 'quality', 'admin'].map((who) => signIn(server.url, `${who}@plumbline.test`)),
  );
  crew = await connectAs(server.url, paramedic);

  // A: full recommended, limited decided with a reason (below), team 20 min after arrival (late).
  cases.A = await handled('full', '2027-06-03T10:00:00Z', { decide: 'limited', reason: '=HYPERLINK("http://x.example","look") — crew over-called', teamMin: 20 });
  // B: consult recommended, full decided (differs, above), acknowledged after 5 min (overdue at 2), team 10 min.
  cases.B = await handled('consult', '2027-06-10T14:00:00Z', { ackMin: 5, decide: 'full', teamMin: 10 });
  // C: full and full, team at exactly 15 min: within the standard.
  cases.C = await handled('full', '2027-06-15T02:00:00Z', { decide: 'full', teamMin: 15 });
  // F: full and full, no bedside time ever recorded.
  cases.F = await handled('full', '2027-06-20T09:00:00Z', { decide: 'full', teamMin: null });
  // G: full and full, team at 16 min: late.
  cases.G = await handled('full', '2027-06-25T18:00:00Z', { decide: 'full', teamMin: 16 });
  // H: full and full, arrived 02:00 UTC on 1 July (30 June, evening, in New York), team at 5 min.
  cases.H = await handled('full', '2027-07-01T01:30:00Z', { decide: 'full', teamMin: 5 });
  // D: no activation recommended, acknowledged, never decided, still on the board.
  cases.D = await submit('none', t('2027-07-05T12:00:00Z'));
  await act(cases.D, 'acknowledge', t('2027-07-05T12:00:30Z'));
  // L: limited recommended, limited decided, closed with no bedside time.
  cases.L = await handled('limited', '2027-07-08T08:00:00Z', { decide: 'limited', teamMin: null });
  // E: a pre-alert to Fenmoor Community, where the trauma lead is not a member.
  cases.E = await submit('limited', t('2027-07-10T12:00:00Z'), fenmoor);
  now = t('2027-08-01T09:00:00Z');
}, 60_000);

afterAll(async () => {
  crew?.close();
  await server?.close();
});

describe('who may read and write reviews', () => {
  it('answers 401 without a session', async () => {
    const res = await fetch(`${server.url}/api/review/cases`, { headers: { accept: 'application/json' } });
    expect(res.status).toBe(401);
  });

  it('refuses the charge nurse and the paramedic (403), and lets the quality team read', async () => {
    expect((await nurse.get('/api/review/cases')).status).toBe(403);
    expect((await paramedic.get('/api/review/cases')).status).toBe(403);
    expect((await nurse.get(`/api/review/cases/${cases.A}`)).status).toBe(403);
    expect((await quality.get('/api/review/cases?from=2027-06-01&to=2027-07-31')).status).toBe(200);
    expect((await quality.get(`/api/review/cases/${cases.A}`)).status).toBe(200);
    expect((await quality.get('/api/review/compliance')).status).toBe(200);
  });

  it('lets only the trauma lead and the administrator sign off or flag; the quality team reads only', async () => {
    const res = await quality.send('POST', `/api/review/cases/${cases.L}/sign-off`, {});
    expect(res.status).toBe(403);
    expect((await nurse.send('POST', `/api/review/cases/${cases.L}/flag`, { comment: 'why so slow' })).status).toBe(403);
    expect(await server.db('reviews').where({ case_id: cases.L }).count({ n: '*' }).first()).toEqual({ n: 0 });
  });

  it('keeps the trauma lead to their own hospital: another hospital is 403, its cases are not listed', async () => {
    expect((await lead.get(`/api/review/cases/${cases.E}`)).status).toBe(403);
    expect((await lead.get(`/api/review/cases?hospitalId=${fenmoor}`)).status).toBe(403);
    expect((await lead.send('POST', `/api/review/cases/${cases.E}/flag`, { comment: 'not mine' })).status).toBe(403);
    expect(ids(await list(lead, 'pageSize=100'))).not.toContain(cases.E);
    // The administrator is a member of both hospitals.
    expect(ids(await list(admin, `hospitalId=${fenmoor}`))).toEqual([cases.E]);
  });

  it('answers 404 for a case that does not exist', async () => {
    expect((await lead.get('/api/review/cases/999999')).status).toBe(404);
  });
});

describe('the review table', () => {
  it('lists the lead’s cases of the date range, newest first by default', async () => {
    const page = await list(lead, '');
    expect(ids(page)).toEqual([cases.L, cases.D, cases.H, cases.G, cases.F, cases.C, cases.B, cases.A]);
    expect(page.total).toBe(8);
  });

  it('finds the cases decided below their recommendation', async () => {
    const page = await list(lead, 'below=true');
    expect(ids(page)).toEqual([cases.A]);
    expect(page.rows[0]).toMatchObject({ recommendedLevel: 'full', decidedLevel: 'limited', below: true, differs: true, decidedBy: 'Morgan Achterberg' });
  });

  it('finds recommended and decided that differ, either way', async () => {
    expect(ids(await list(lead, 'differs=true&sort=createdAt&dir=asc'))).toEqual([cases.A, cases.B]);
  });

  it('finds an acknowledgement later than the hospital’s 2 escalation minutes', async () => {
    const page = await list(lead, 'overdue=true');
    expect(ids(page)).toEqual([cases.B]);
    expect(page.rows[0]).toMatchObject({ ackMinutes: 5, ackOverdue: true });
  });

  it('finds a team response over 15 minutes, and not one at exactly 15', async () => {
    const page = await list(lead, 'slowTeam=true&sort=createdAt&dir=asc');
    expect(ids(page)).toEqual([cases.A, cases.G]);
    expect(page.rows.map((r) => r.teamMinutes)).toEqual([20, 16]);
  });

  it('filters by decided level, and by no decision yet', async () => {
    expect(ids(await list(lead, 'decided=limited&sort=createdAt&dir=asc'))).toEqual([cases.A, cases.L]);
    expect(ids(await list(lead, 'decided=undecided'))).toEqual([cases.D]);
  });

  it('narrows by date range in the reader’s time zone', async () => {
    // H's pre-alert was 01:30 UTC on 1 July: still 30 June in New York.
    const utc = await lead.get('/api/review/cases?from=2027-06-01&to=2027-06-30');
    expect(ids(await utc.json())).toEqual([cases.G, cases.F, cases.C, cases.B, cases.A]);
    const ny = await lead.get('/api/review/cases?from=2027-06-01&to=2027-06-30&timeZone=America/New_York');
    expect(ids(await ny.json())).toEqual([cases.H, cases.G, cases.F, cases.C, cases.B, cases.A]);
  });

  it('combines filters (AND)', async () => {
    expect(ids(await list(lead, 'decided=full&slowTeam=true'))).toEqual([cases.G]);
  });

  it('sorts on the server by a whitelisted column, missing values last', async () => {
    const byTeam = await list(lead, 'sort=teamMinutes&dir=desc');
    expect(byTeam.rows.map((r) => r.teamMinutes)).toEqual([20, 16, 15, 10, 5, null, null, null]);
    const byRecommended = await list(lead, 'sort=recommended&dir=asc');
    expect(byRecommended.rows.map((r) => r.recommendedLevel)).toEqual(['none', 'consult', 'limited', 'full', 'full', 'full', 'full', 'full']);
  });

  it('paginates on the server', async () => {
    const first = await list(lead, 'sort=createdAt&dir=asc&pageSize=5&page=1');
    const second = await list(lead, 'sort=createdAt&dir=asc&pageSize=5&page=2');
    expect(ids(first)).toEqual([cases.A, cases.B, cases.C, cases.F, cases.G]);
    expect(ids(second)).toEqual([cases.H, cases.D, cases.L]);
    expect([first.total, second.total, second.page, second.pageSize]).toEqual([8, 8, 2, 5]);
  });

  it('refuses bad filters with a 400 naming the field', async () => {
    const cases400 = [
      ['sort=password', 'sort'],
      ['from=June', 'from'],
      ['from=2027-07-01&to=2027-06-01', 'to'],
      ['below=perhaps', 'below'],
      ['decided=maximum', 'decided'],
      ['pageSize=1000', 'pageSize'],
      ['timeZone=Mars/Olympus', 'timeZone'],
    ];
    for (const [query, field] of cases400) {
      const res = await lead.get(`/api/review/cases?${query}`);
      expect(res.status, query).toBe(400);
      expect((await res.json()).error.field, query).toBe(field);
    }
  });
});

describe('a case’s timeline', () => {
  it('shows every step with who and when, the criteria of each revision and the intervals against their targets', async () => {
    const res = await lead.get(`/api/review/cases/${cases.A}`);
    const body = await res.json();
    expect(body.events.map((e: { kind: string }) => e.kind)).toEqual(['received', 'acknowledged', 'level-decided', 'arrived', 'team-at-bedside', 'closed']);
    expect(body.events[0]).toMatchObject({ actor: 'Robin Vasquez-Hale', actorRole: 'paramedic', at: t('2027-06-03T10:00:00Z') });
    expect(body.events[2]).toMatchObject({ actor: 'Morgan Achterberg', actorRole: 'charge_nurse' });
    expect(body.revisions).toHaveLength(1);
    expect(body.revisions[0].criteria.map((c: { id: string }) => c.id)).toContain('field-2021:sbp-below-90-age-10-64');
    expect(body.levelNames.full).toBe('Full trauma team');
    expect(body.intervals.find((i: { id: string }) => i.id === 'pre-alert-to-acknowledged')).toMatchObject({ minutes: 1, targetMinutes: 2, met: true });
    expect(body.intervals.find((i: { id: string }) => i.id === 'arrival-to-team')).toMatchObject({ minutes: 20, targetMinutes: 15, met: false });
    expect(body).toMatchObject({ review: 'unreviewed', canReview: true, reviewBlocked: null });
  });

  it('tells the quality team it reads only', async () => {
    expect((await (await quality.get(`/api/review/cases/${cases.A}`)).json()).canReview).toBe(false);
  });
});

describe('review work', () => {
  it('signs a case off, once: a second sign-off is told who did it', async () => {
    const res = await lead.send('POST', `/api/review/cases/${cases.C}/sign-off`, { comment: 'Textbook.' });
    expect(res.status).toBe(201);
    expect(await res.json()).toMatchObject({ status: 'signed-off', comment: 'Textbook.', reviewer: 'Dr. Sasha Imbert' });
    const again = await admin.send('POST', `/api/review/cases/${cases.C}/sign-off`, {});
    expect(again.status).toBe(409);
    expect((await again.json()).error.message).toBe(`Case ${(await server.db('cases').where({ id: cases.C }).first('case_number')).case_number} was already signed off by Dr. Sasha Imbert.`);
    expect(ids(await list(lead, 'review=signed-off'))).toEqual([cases.C]);
  });

  it('needs a comment to flag for peer review (400 naming the field), and saves nothing without one', async () => {
    const res = await lead.send('POST', `/api/review/cases/${cases.A}/flag`, { comment: ' ' });
    expect(res.status).toBe(400);
    expect((await res.json()).error.field).toBe('comment');
    expect(await server.db('reviews').where({ case_id: cases.A }).count({ n: '*' }).first()).toEqual({ n: 0 });
  });

  it('keeps a flagged case on the to-discuss list until it is closed with an outcome', async () => {
    const flag = await lead.send('POST', `/api/review/cases/${cases.A}/flag`, { comment: 'Decided below a full recommendation; discuss.' });
    expect(flag.status).toBe(201);
    const review = await flag.json();
    // The demo scenario has flagged cases of its own; these are the test's.
    const ours = async () => ((await (await lead.get('/api/review/discussion')).json()).items as Array<{ case: { id: number }; review: unknown }>).filter((i) => Object.values(cases).includes(i.case.id));
    const listed = await ours();
    expect(listed.map((i) => i.case.id)).toEqual([cases.A]);
    expect(listed[0].review).toMatchObject({ status: 'flagged', comment: 'Decided below a full recommendation; discuss.' });

    const signOff = await lead.send('POST', `/api/review/cases/${cases.A}/sign-off`, {});
    expect(signOff.status).toBe(409);
    const noOutcome = await lead.send('POST', `/api/review/reviews/${review.id}/close`, {});
    expect(noOutcome.status).toBe(400);
    expect((await noOutcome.json()).error.field).toBe('outcome');
    expect((await quality.send('POST', `/api/review/reviews/${review.id}/close`, { outcome: 'fine' })).status).toBe(403);

    const closed = await admin.send('POST', `/api/review/reviews/${review.id}/close`, { outcome: 'Level justified by the crew’s update; no change to policy.' });
    expect(closed.status).toBe(200);
    expect(await closed.json()).toMatchObject({ status: 'discussed', closedBy: 'Kit Marchetti', outcome: 'Level justified by the crew’s update; no change to policy.' });
    expect(await ours()).toEqual([]);
    expect((await lead.send('POST', `/api/review/reviews/${review.id}/close`, { outcome: 'again' })).status).toBe(409);
  });

  it('audits each review step as one row on the case, with the reviewer’s role and the case’s policy version', async () => {
    const rows = await server.db('audit_log').where({ case_id: cases.A }).where('action', 'like', 'case.review-%').orderBy('id');
    expect(rows.map((r) => [r.action, r.actor_role, r.policy_id, r.policy_version])).toEqual([
      ['case.review-flagged', 'trauma_lead', 'example-tiered', 1],
      ['case.review-discussed', 'admin', 'example-tiered', 1],
    ]);
    expect(JSON.parse(rows[1].before)).toEqual({ review: 'flagged', comment: 'Decided below a full recommendation; discuss.' });
  });

  it('does not open review before the patient has arrived', async () => {
    const res = await lead.send('POST', `/api/review/cases/${cases.D}/sign-off`, {});
    expect(res.status).toBe(409);
    expect((await (await lead.get(`/api/review/cases/${cases.D}`)).json()).reviewBlocked).toMatch(/has not arrived yet/);
  });
});

describe('response-time compliance', () => {
  it('counts highest-level activations with the team leader at the bedside within 15 minutes, per month, against 80 %', async () => {
    const res = await lead.get('/api/review/compliance?from=2027-06-01&to=2027-07-31');
    const report = await res.json();
    // Hand count. June: B 10 min met, C 15 min met, F not recorded, G 16 min late (A was decided limited).
    // July: H 5 min met. Standard 15 min [source: Ingraham A et al.], 80 % [memory].
    expect(report).toMatchObject({ targetMinutes: 15, targetShare: 0.8 });
    expect(report.months.map((m: Record<string, unknown>) => [m.month, m.activations, m.met, m.late, m.notRecorded, m.share, m.meetsTarget])).toEqual([
      ['2027-06', 4, 2, 1, 1, 0.5, false],
      ['2027-07', 1, 1, 0, 0, 1, true],
    ]);
    expect(report.overall).toMatchObject({ activations: 5, met: 3, share: 0.6, meetsTarget: false });
    // Wilson 95 % interval for 3 of 5 [source: Wilson EB 1927], worked by hand: 0.231–0.882.
    expect(report.overall.interval[0]).toBeCloseTo(0.2307, 3);
    expect(report.overall.interval[1]).toBeCloseTo(0.8824, 3);
  });

  it('puts an arrival in the reader’s month', async () => {
    const report = await (await lead.get('/api/review/compliance?from=2027-06-01&to=2027-07-31&timeZone=America/New_York')).json();
    expect(report.months.map((m: { month: string; activations: number; met: number }) => [m.month, m.activations, m.met])).toEqual([['2027-06', 5, 3], ['2027-07', 0, 0]]);
  });

  it('follows the hospital’s own target once an administrator changes it, and audits the change', async () => {
    expect((await lead.send('PUT', '/api/review/settings', { hospitalId: general, targetMinutes: 20, compliance: 0.75 })).status).toBe(403);
    const bad = await admin.send('PUT', '/api/review/settings', { hospitalId: general, targetMinutes: 20, compliance: 75 });
    expect(bad.status).toBe(400);
    expect((await bad.json()).error.field).toBe('compliance');
    const ok = await admin.send('PUT', '/api/review/settings', { hospitalId: general, targetMinutes: 20, compliance: 0.75 });
    expect(ok.status).toBe(200);
    const report = await (await lead.get('/api/review/compliance?from=2027-06-01&to=2027-06-30')).json();
    // With 20 minutes G (16) counts as met: 3 of 4 = 75 %, which meets a 75 % target.
    expect(report.months[0]).toMatchObject({ month: '2027-06', activations: 4, met: 3, late: 0, notRecorded: 1, share: 0.75, meetsTarget: true });
    const audited = await server.db('audit_log').where({ entity: 'setting' }).orderBy('id').select('action', 'entity_id', 'actor_role', 'after');
    expect(audited.map((r) => [r.action, r.entity_id, r.actor_role, JSON.parse(r.after).value])).toEqual([
      ['setting.changed', `${general}:response.targetMinutes`, 'admin', 20],
      ['setting.changed', `${general}:response.compliance`, 'admin', 0.75],
    ]);
    // Put the standard back for the tests after this one.
    await admin.send('PUT', '/api/review/settings', { hospitalId: general, targetMinutes: 15, compliance: 0.8 });
  });
});

describe('export', () => {
  it('downloads the filtered table as CSV, with a formula-looking reason neutralised', async () => {
    const res = await lead.get('/api/review/cases.csv?from=2027-06-01&to=2027-07-31&below=true');
    expect(res.status).toBe(200);
    expect(res.headers.get('content-type')).toBe('text/csv; charset=utf-8');
    expect(res.headers.get('content-disposition')).toBe('attachment; filename=activation-review-2027-08-01.csv');
    const lines = (await res.text()).replace(/^\uFEFF/, '').split('\r\n');
    expect(lines[0]).toBe('case,pre-alert at (UTC),hospital,agency,unit,state,recommended level,recommended level name,decided level,decided level name,decided by,reason,decided below recommendation,minutes to acknowledge,acknowledgement overdue,minutes arrival to team,team over target,review,reviewed by');
    const caseNumber = (await server.db('cases').where({ id: cases.A }).first('case_number')).case_number;
    expect(lines[1]).toBe(`${caseNumber},2027-06-03T10:00:00.000Z,Alderwick General Hospital,Alderwick County Ambulance Service,,closed,full,Full trauma team,limited,Limited trauma team,Morgan Achterberg,"'=HYPERLINK(""http://x.example"",""look"") — crew over-called",yes,1,no,20,yes,discussed,Kit Marchetti`);
    expect(lines).toHaveLength(3);
    expect(lines[2]).toBe('');
  });

  it('refuses the export to the charge nurse', async () => {
    expect((await nurse.get('/api/review/cases.csv')).status).toBe(403);
  });
});

describe('toCsv', () => {
  it('gives a leading apostrophe to every cell that starts like a formula', () => {
    expect(['=1+1', '+44 20', '-2+3', '@SUM(A1)', '\tx', '\rx'].map(csvCell)).toEqual(["'=1+1", "'+44 20", "'-2+3", "'@SUM(A1)", "'\tx", "\"'\rx\""]);
  });

  it('keeps plain numbers, quotes commas, quotes and line breaks, and leaves empty for null', () => {
    expect(toCsv([{ a: -3.5, b: 'a, "b"', c: null }, { a: 0, b: 'two\nlines', c: undefined }], [
      { header: 'a', value: (r) => r.a },
      { header: 'b', value: (r) => r.b },
      { header: 'c', value: (r) => r.c },
    ])).toBe('a,b,c\r\n-3.5,"a, ""b""",\r\n0,"two\nlines",\r\n');
  });
});
