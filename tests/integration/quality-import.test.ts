import { createHash, randomUUID } from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startTestServer, type TestServer } from '../support/server';
import { browserlessClient, signIn, type SignedInClient } from '../support/sign-in';
import { loadMe } from '../../server/auth/guards';
import { openDb } from '../../server/db';
import { importOutcomes } from '../../server/services/outcomes/import';
import { verifyAuditChain } from '../../server/services/audit/audit';
import { submitPreAlert } from '../../server/services/cases/commands';
import { OUTCOME_COLUMN_NAMES, type ImportPreview } from '../../shared/schemas/quality';

// The registry outcome import: every row checked and every problem named (row, column, what)
// before anything is saved; a save is all rows in one transaction or none; a case imported again
// is updated, and every insert and update leaves an audit row.

let server: TestServer;
let quality: SignedInClient;
let admin: SignedInClient;
let lead: SignedInClient;
let nurse: SignedInClient;
let general: number;
let community: number;
const numbers: string[] = [];
let cancelled: string;
let communityCase: string;
let now = Date.parse('2030-06-01T08:00:00Z');
const clock = { now: () => now };

const patient = {
  ageYears: 55, sex: 'female', anticoagulant: false, pregnancyWeeks: null,
  fall: { heightM: 5, surface: 'concrete', firstImpact: 'lower-limb-feet', headImpact: false },
  vitals: { sbp: 120, hr: 90, rr: 18, spo2: 97, spo2RoomAir: true, gcs: { eye: 4, verbal: 5, motor: 6 } },
  findings: [], considerations: [],
};

async function makeCase(hospitalId: number, state = 'closed'): Promise<string> {
  now += 3_600_000;
  const paramedic = await server.db('users').where({ email: 'paramedic@plumbline.test' }).first('id');
  const me = (await loadMe(server.db, paramedic.id))!;
  const { caseId } = await submitPreAlert(server.db, clock, { me, role: 'paramedic' }, { clientId: randomUUID(), hospitalId, clinical: patient as never });
  await server.db('cases').where({ id: caseId }).update({ state, decided_level: 'consult' });
  return (await server.db('cases').where({ id: caseId }).first('case_number')).case_number;
}

function post(client: SignedInClient, path: string, file: { body: string | Uint8Array; name?: string; type?: string } | null, hospitalId: number | string = general, extra: Record<string, string> = {}) {
  const form = new FormData();
  form.set('hospitalId', String(hospitalId));
  for (const [k, v] of Object.entries(extra)) form.set(k, v);
  if (file) form.set('file', new Blob([file.body as BlobPart], { type: file.type ?? 'text/csv' }), file.name ?? 'registry.csv');
  return client.fetch(new URL(path, server.url), { method: 'POST', body: form, headers: { origin: new URL(server.url).origin, accept: 'application/json' } });
}
const preview = async (csv: string, client = quality) => {
  const res = await post(client, '/api/quality/outcomes/preview', { body: csv });
  expect(res.status, await res.clone().text()).toBe(200);
  return (await res.json()) as ImportPreview;
};
const confirm = (token: string, client = quality) => client.send('POST', '/api/quality/outcomes/import', { hospitalId: general, token });

const outcomeCount = async () => Number((await server.db('outcomes').count({ n: '*' }).first())!.n);
const auditCount = async () => Number((await server.db('audit_log').where({ entity: 'outcome' }).count({ n: '*' }).first())!.n);
const storedIss = async (caseNumber: string) => (await server.db('outcomes as o').join('cases as c', 'c.id', 'o.case_id').where('c.case_number', caseNumber).first('o.iss'))?.iss;

beforeAll(async () => {
  server = await startTestServer({}, { clock });
  [quality, admin, lead, nurse] = await Promise.all(['quality', 'admin', 'lead', 'nurse'].map((who) => signIn(server.url, `${who}@plumbline.test`)));
  const hospitals = await server.db('hospitals').select('id', 'short_name');
  general = hospitals.find((h) => h.short_name === 'Alderwick General').id;
  community = hospitals.find((h) => h.short_name === 'Fenmoor Community').id;
  for (let i = 0; i < 4; i++) numbers.push(await makeCase(general));
  cancelled = await makeCase(general, 'cancelled');
  communityCase = await makeCase(community);
});
afterAll(() => server?.close());

describe('the template', () => {
  it('downloads as CSV with every column the import reads', async () => {
    const res = await quality.get('/api/quality/outcomes/template.csv');
    expect(res.status).toBe(200);
    expect(res.headers.get('content-disposition')).toBe('attachment; filename=registry-outcomes-template.csv');
    const [header] = (await res.text()).split('\r\n');
    expect(header).toBe('case_number,iss,niss,ais_head_neck,ais_face,ais_chest,ais_abdomen,ais_extremities,ais_external,red_cells_4h,minutes_to_or,minutes_to_ir,icu_days,hours_to_ventilation,hours_to_death,nfti,disposition');
    expect(header.split(',')).toEqual(OUTCOME_COLUMN_NAMES);
  });
});

describe('the preview names every problem and stores nothing', () => {
  it('one error per bad cell, with its row and column', async () => {
    const csv = [
      'case_number,iss,ais_chest,ais_extremities,red_cells_4h,minutes_to_or,icu_days,nfti,disposition',
      `${numbers[0]},,3 2,3,no,none,4,,icu`, // row 2: good; ICU 4 days meets NFTI
      'P99-99999,20,,,,,,,home', // row 3: no such case
      `${numbers[1]},7,,,,,,,ward`, // row 4: 7 is not a possible ISS
      `${numbers[2]},16,3,3,,,,,ward`, // row 5: AIS give 18, not 16
      `${numbers[3]},9,,,yes,,,no,ward`, // row 6: red cells within 4 h meet NFTI, yet "no"
      `${numbers[0]},4,,,,,,,home`, // row 7: the same case again
      `${cancelled},4,,,,,,,home`, // row 8: cancelled
      `${communityCase},4,,,,,,,home`, // row 9: another hospital's case
      `${numbers[1]},4,,9,maybe,soon,,,hospice`, // row 10: AIS 9, bad yes/no, bad minutes, bad disposition
    ].join('\n');
    const before = { outcomes: await outcomeCount(), audit: await auditCount() };
    const p = await preview(csv);
    expect(p.token).toBeNull();
    expect(p.counts).toEqual({ rows: 9, valid: 1, new: 1, update: 0, errors: 11 });
    expect(p.errors).toEqual([
      { row: 3, column: 'case_number', message: 'no case P99-99999 at Alderwick General Hospital; check the number Plumbline gave the pre-alert' },
      { row: 4, column: 'iss', message: '7 cannot be a score: it is not a sum of three AIS squares (check for a typing slip)' },
      { row: 5, column: 'iss', message: '16 does not match the AIS columns, which give ISS 18' },
      { row: 6, column: 'nfti', message: 'says no, but the NFTI fields of this row meet the definition' },
      { row: 7, column: 'case_number', message: `${numbers[0]} is already on row 2; keep one row per case` },
      { row: 8, column: 'case_number', message: `${cancelled} was cancelled before arrival, so it has no outcome here` },
      { row: 9, column: 'case_number', message: `no case ${communityCase} at Alderwick General Hospital; check the number Plumbline gave the pre-alert` },
      { row: 10, column: 'ais_extremities', message: 'AIS 9 (severity not known) cannot be scored; the registry must resolve it first' },
      { row: 10, column: 'red_cells_4h', message: '"maybe" must be yes or no (or empty when not recorded)' },
      { row: 10, column: 'minutes_to_or', message: '"soon" must be a number, "none" when it did not happen, or empty when not recorded' },
      { row: 10, column: 'disposition', message: '"hospice" must be one of: home, ward, icu, operating-room, interventional-radiology, transferred, died, other' },
    ]);
    // Row 2 scored from its AIS: chest 3, extremities 3 → ISS 9 + 9 = 18, NISS 9 + 9 + 4 = 22 [source: Baker 1974; Osler 1997].
    expect(p.rows[0]).toMatchObject({ row: 2, action: 'new', record: { iss: 18, niss: 22, nftiPositive: true, disposition: 'icu', icuDays: 4, minutesToOperatingRoom: null } });
    expect({ outcomes: await outcomeCount(), audit: await auditCount() }).toEqual(before);
  });

  it('refuses a file whose header has a column it does not know', async () => {
    const p = await preview(`case_number,iss,isss\n${numbers[0]},9,\n`);
    expect(p.errors).toEqual([{ row: 1, column: 'isss', message: `is not a column we know; the columns are: ${OUTCOME_COLUMN_NAMES.join(', ')}` }]);
    expect(p.rows).toEqual([]);
  });

  it('reads a semicolon-separated export, a byte-order mark and headers in capitals', async () => {
    const p = await preview(`\uFEFFCase Number;ISS;NFTI\n${numbers[0]};9;no\n`);
    expect(p.errors).toEqual([]);
    expect(p.rows[0].record).toMatchObject({ caseNumber: numbers[0], iss: 9, nftiPositive: false });
    expect(p.token).toMatch(/^[A-Za-z0-9_-]{20,}$/);
  });

  it('a row with nothing to import is an error', async () => {
    const p = await preview(`case_number,iss,disposition\n${numbers[0]},,home\n`);
    expect(p.errors).toEqual([{ row: 2, column: null, message: 'has no ISS, no AIS injuries and no NFTI; there is no outcome to import' }]);
  });
});

describe('the save is all rows or none', () => {
  it('a file with one bad row saves nothing, and an outcome already stored stays as it was', async () => {
    const first = await preview(`case_number,iss\n${numbers[3]},25\n`);
    expect((await confirm(first.token!)).status).toBe(201);
    expect(await storedIss(numbers[3])).toBe(25);
    const before = { outcomes: await outcomeCount(), audit: await auditCount() };

    const res = await post(quality, '/api/quality/outcomes/import', { body: `case_number,iss\n${numbers[3]},9\n${numbers[2]},15\n` });
    expect(res.status).toBe(400);
    const body = await res.json();
    expect(body.error.code).toBe('invalid_rows');
    expect(body.error.message).toBe('Nothing was saved: 1 problem in the file, the first at row 3, iss: 15 cannot be a score: it is not a sum of three AIS squares (check for a typing slip)');
    expect({ outcomes: await outcomeCount(), audit: await auditCount() }).toEqual(before);
    expect(await storedIss(numbers[3])).toBe(25);
  });

  it('confirming a clean preview saves every row, audited, and a second import of a case updates it', async () => {
    const p = await preview(`case_number,iss,nfti,disposition\n${numbers[0]},9,no,home\n${numbers[1]},17,yes,icu\n`);
    expect(p.counts).toEqual({ rows: 2, valid: 2, new: 2, update: 0, errors: 0 });
    const res = await confirm(p.token!);
    expect(res.status).toBe(201);
    const saved = await res.json();
    expect(saved).toMatchObject({ saved: 2, created: 2, updated: 0 });
    expect(await storedIss(numbers[1])).toBe(17);
    const rows = await server.db('outcomes').where({ batch: saved.batch }).count({ n: '*' }).first();
    expect(Number(rows!.n)).toBe(2);

    const again = await preview(`case_number,iss,nfti,disposition\n${numbers[1]},25,yes,icu\n`);
    expect(again.rows[0].action).toBe('update');
    expect((await (await confirm(again.token!)).json())).toMatchObject({ saved: 1, created: 0, updated: 1 });
    expect(await storedIss(numbers[1])).toBe(25);
    const caseId = (await server.db('cases').where({ case_number: numbers[1] }).first('id')).id;
    const audit = await server.db('audit_log').where({ entity: 'outcome', entity_id: String(caseId) }).orderBy('id').select('action', 'actor_role', 'before', 'after', 'case_id');
    expect(audit.map((a) => [a.action, a.actor_role, a.case_id])).toEqual([['outcome.imported', 'quality', caseId], ['outcome.updated', 'quality', caseId]]);
    expect(JSON.parse(audit[1].before).iss).toBe(17);
    expect(JSON.parse(audit[1].after).iss).toBe(25);
    expect(await verifyAuditChain(server.db)).toMatchObject({ ok: true });
  });

  it('a preview token is used once, and only by the person who made it', async () => {
    const p = await preview(`case_number,iss\n${numbers[2]},4\n`);
    const other = await confirm(p.token!, admin);
    expect(other.status).toBe(404);
    expect((await confirm(p.token!)).status).toBe(201);
    const reused = await confirm(p.token!);
    expect(reused.status).toBe(409);
    expect((await reused.json()).error.message).toBe('That preview has expired or was already saved; check the file again.');
  });

  it('a preview is kept in the database: another connection (a restart, a second process) confirms it', async () => {
    const p = await preview(`case_number,iss\n${numbers[3]},9\n`);
    // Only a hash of the token is stored.
    const held = await server.db('outcome_import_previews').select('token_hash', 'file_name', 'expires_at');
    expect(held.some((h) => h.token_hash === p.token)).toBe(false);
    expect(held).toContainEqual({ token_hash: createHash('sha256').update(p.token!).digest('hex'), file_name: 'registry.csv', expires_at: p.expiresAt });
    const other = openDb(server.config);
    try {
      const qualityUser = await other('users').where({ email: 'quality@plumbline.test' }).first('id');
      const me = (await loadMe(other, qualityUser.id))!;
      expect(await importOutcomes(other, me, general, { token: p.token! }, now)).toMatchObject({ saved: 1, created: 0, updated: 1 });
    } finally {
      await other.destroy();
    }
    expect(await storedIss(numbers[3])).toBe(9);
    expect((await confirm(p.token!)).status).toBe(409);
  });

  it('a preview expires after 15 minutes, and its file is removed', async () => {
    const p = await preview(`case_number,iss\n${numbers[3]},4\n`);
    expect(p.expiresAt).toBe(now + 15 * 60_000);
    now += 15 * 60_000;
    const late = await confirm(p.token!);
    expect(late.status).toBe(409);
    expect((await late.json()).error.message).toBe('That preview has expired or was already saved; check the file again.');
    expect(await server.db('outcome_import_previews').where({ token_hash: createHash('sha256').update(p.token!).digest('hex') }).first()).toBeUndefined();
    expect(await storedIss(numbers[3])).toBe(9);
  });
});

describe('limits on the file', () => {
  it('refuses a file that is not a CSV (415), a file over 2 MB (413) and a request without a file (400)', async () => {
    const notCsv = await post(quality, '/api/quality/outcomes/preview', { body: 'case_number\n', name: 'outcomes.xlsx', type: 'application/vnd.openxmlformats-officedocument.spreadsheetml.sheet' });
    expect(notCsv.status).toBe(415);
    expect((await notCsv.json()).error.message).toBe('outcomes.xlsx is not a CSV file; export the registry data as .csv and choose that file.');
    const big = await post(quality, '/api/quality/outcomes/preview', { body: `case_number,iss\n${'P30-00001,9\n'.repeat(200_000)}` });
    expect(big.status).toBe(413);
    const none = await post(quality, '/api/quality/outcomes/preview', null);
    expect(none.status).toBe(400);
    expect((await none.json()).error).toMatchObject({ field: 'file', message: 'file: is missing; choose the registry CSV file' });
    const noHospital = await post(quality, '/api/quality/outcomes/preview', { body: 'case_number\n' }, 'x');
    expect((await noHospital.json()).error.message).toBe('hospitalId: must be a hospital number');
  });
});

describe('who may import', () => {
  it('the quality team and the administrator import; the trauma lead and the charge nurse may not (403); nobody signed out (401)', async () => {
    const csv = `case_number,iss\n${numbers[2]},4\n`;
    expect((await post(quality, '/api/quality/outcomes/preview', { body: csv })).status).toBe(200);
    expect((await post(admin, '/api/quality/outcomes/preview', { body: csv })).status).toBe(200);
    for (const client of [lead, nurse]) {
      const res = await post(client, '/api/quality/outcomes/preview', { body: csv });
      expect(res.status).toBe(403);
      expect((await post(client, '/api/quality/outcomes/import', { body: csv })).status).toBe(403);
    }
    expect((await post(browserlessClient(server.url), '/api/quality/outcomes/preview', { body: csv })).status).toBe(401);
  });

  it("refuses the quality team another hospital's import; the administrator of both may", async () => {
    const csv = `case_number,iss\n${communityCase},4\n`;
    const refused = await post(quality, '/api/quality/outcomes/preview', { body: csv }, community);
    expect(refused.status).toBe(403);
    expect((await refused.json()).error.message).toBe('That hospital is not one of yours.');
    const res = await post(admin, '/api/quality/outcomes/import', { body: csv }, community);
    expect(res.status).toBe(201);
    expect(await storedIss(communityCase)).toBe(4);
  });
});
