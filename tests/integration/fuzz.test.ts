import { randomUUID } from 'node:crypto';
import { parse as parseCsv } from 'csv-parse/sync';
import fc from 'fast-check';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { BOARD_ACTIONS, BOARD_ACTION_SCHEMAS } from '../../shared/schemas/board';
import { PreAlert, PreAlertUpdate } from '../../shared/schemas/cases';
import { ClinicalInput, CONSIDERATIONS, FINDINGS, FIRST_IMPACT_REGIONS, SEXES, SURFACES } from '../../shared/schemas/clinical';
import { CreateUser, HospitalFields } from '../../shared/schemas/people';
import { cleanText, hasVisibleText } from '../../shared/schemas/text';
import { Policy } from '../../shared/triage/policy';
import { ResponseSettings } from '../../shared/schemas/review';
import { OUTCOME_FILE_MAX_BYTES, TargetsInput } from '../../shared/schemas/quality';
import { runEscalation } from '../../server/services/jobs/escalation';
import { verifyAuditChain } from '../../server/services/audit/audit';
import { startTestServer, type TestServer } from '../support/server';
import { signIn, type SignedInClient } from '../support/sign-in';
import { command, connectAs, type TestSocket } from '../support/socket';

// Random and hostile bodies, queries, route ids and socket payloads through the real routes and
// sockets, each with the role that may send them. Whatever arrives: never a server error, a 400
// names the field, a refusal changes nothing, and what is accepted reads back valid.

const RUNS = 60;
// A frozen clock: no case turns overdue while the fuzzers count rows.
const clock = { t: Date.now(), now() { return this.t; } };

let server: TestServer;
let paramedic: SignedInClient;
let nurse: SignedInClient;
let lead: SignedInClient;
let quality: SignedInClient;
let admin: SignedInClient;
let crewSocket: TestSocket;
let ids: { general: number; community: number; agency: number; unit: number; nurse: number; draft: number; draftDocument: Record<string, unknown>; liveCases: number[]; closedCases: number[] };

// ---- Hostile values ----------------------------------------------------------------------------

const longText = fc.string({ minLength: 2001, maxLength: 6000 });
const hostile: fc.Arbitrary<unknown> = fc.oneof(
  fc.constant(null),
  fc.boolean(),
  fc.integer(),
  fc.double(),
  fc.constantFrom(-1, 0, 1e308, -1e308, 2 ** 63, Number.MAX_SAFE_INTEGER + 2, 0.5, 1e-300),
  fc.constantFrom('NaN', 'Infinity', '-0', '1e999', '0x10', '12', '', ' ', 'null', 'true', '2026-02-30', '9999-99-99', '<script>alert(1)</script>', "'; DROP TABLE cases; --"),
  // Text with nothing visible in it, or with controls and bidirectional overrides hiding in it.
  fc.constantFrom('\u200B\u200B\u200B', ' \u2060\uFEFF\u00AD ', '\u202E\u2066\u2069', '\u0000\u0007\u001B', 'Ward\u202E3 yaB', 'Nurse\u0000\u0008 Name', '\u3164\u3164\u3164'),
  fc.string(),
  fc.string({ unit: 'grapheme', maxLength: 40 }),
  longText,
  fc.array(fc.anything({ maxDepth: 2 }), { maxLength: 5 }),
  fc.dictionary(fc.string({ maxLength: 8 }), fc.anything({ maxDepth: 2 }), { maxKeys: 4 }),
  fc.constant(JSON.parse('{"__proto__":{"polluted":true},"constructor":{"prototype":{"polluted":true}}}')),
);

/** The valid value most of the time, otherwise something hostile; sometimes left out altogether. */
const field = <T>(valid: fc.Arbitrary<T>) => fc.oneof({ weight: 5, arbitrary: valid }, { weight: 1, arbitrary: hostile });

/** An object of the given fields where any may be missing, with prototype-pollution keys now and then. */
function body(shape: Record<string, fc.Arbitrary<unknown>>): fc.Arbitrary<unknown> {
  const fields = Object.fromEntries(Object.entries(shape).map(([k, v]) => [k, field(v)]));
  const whole = fc.record(fields);
  const partial = fc.record(fields, { requiredKeys: [] });
  const polluted = fc.tuple(whole, fc.constantFrom('__proto__', 'constructor', 'prototype')).map(([value, key]) => {
    const out = { ...(value as object) };
    Object.defineProperty(out, key, { value: { polluted: true, prototype: { polluted: true } }, enumerable: true });
    return out;
  });
  return fc.oneof({ weight: 6, arbitrary: whole }, { weight: 2, arbitrary: partial }, { weight: 1, arbitrary: polluted }, { weight: 1, arbitrary: hostile });
}

const level = fc.constantFrom('full', 'limited', 'consult', 'none');

/** The clinical input with each field passed through `wrap`: `field` for hostile values now and then, `valid` for none. */
const clinicalOf = (wrap: <T>(valid: fc.Arbitrary<T>) => fc.Arbitrary<unknown>) => fc.record(
  {
    ageYears: wrap(fc.double({ min: 0, max: 120, noNaN: true })),
    sex: wrap(fc.constantFrom(...SEXES)),
    pregnancyWeeks: wrap(fc.option(fc.integer({ min: 0, max: 45 }))),
    anticoagulant: wrap(fc.option(fc.boolean())),
    weightKg: wrap(fc.option(fc.integer({ min: 1, max: 400 }))),
    fall: wrap(fc.record({ heightM: wrap(fc.double({ min: 0, max: 1000, noNaN: true })), surface: wrap(fc.constantFrom(...SURFACES)), firstImpact: wrap(fc.constantFrom(...FIRST_IMPACT_REGIONS)), headImpact: wrap(fc.boolean()) }, { requiredKeys: ['heightM'] })),
    vitals: wrap(fc.record({ sbp: wrap(fc.integer({ min: 0, max: 300 })), hr: wrap(fc.integer({ min: 0, max: 300 })), gcs: wrap(fc.record({ eye: wrap(fc.integer({ min: 1, max: 4 })), verbal: wrap(fc.integer({ min: 1, max: 5 })), motor: wrap(fc.integer({ min: 1, max: 6 })) })), gcsTotal: wrap(fc.integer({ min: 3, max: 15 })) }, { requiredKeys: [] })),
    findings: wrap(fc.array(fc.constantFrom(...FINDINGS), { maxLength: 4 })),
    considerations: wrap(fc.array(fc.constantFrom(...CONSIDERATIONS), { maxLength: 3 })),
  },
  { requiredKeys: ['ageYears', 'fall'] },
);
const clinical = clinicalOf(field);
const validClinical = clinicalOf((valid) => valid);

/**
 * Mostly `body(shape)`, and a quarter of the time the shape with only valid values, so that the
 * accepting path runs in every run, whatever the seed: with hostile values in a dozen nested
 * fields a wholly valid payload alone is rare enough that 100 runs can miss it.
 */
const bodyOrValid = (shape: Record<string, fc.Arbitrary<unknown>>, valid: Record<string, fc.Arbitrary<unknown>>) =>
  fc.oneof({ weight: 3, arbitrary: body(shape) }, { weight: 1, arbitrary: fc.record({ ...shape, ...valid }) });

// ---- What the database holds ---------------------------------------------------------------------

const TABLES = ['cases', 'case_revisions', 'case_events', 'audit_log', 'reviews', 'policy_versions', 'users', 'user_roles', 'memberships', 'hospitals', 'agencies', 'units', 'agency_hospitals', 'notification_lists', 'settings', 'outcomes'];

/** Row counts of every table a request could write, and a digest of the rows updates touch. */
async function fingerprint(): Promise<string> {
  const counts = await Promise.all(TABLES.map(async (t) => Number((await server.db(t).count({ n: '*' }).first())!.n)));
  // Read with the query builder, in id order, so the digest is the same on SQLite and PostgreSQL.
  const cases = await server.db('cases').orderBy('id').select('row_version', 'state', 'bay');
  const people = await server.db('users').orderBy('id').select('name', 'active');
  const places = await server.db('hospitals').orderBy('id').select('name', 'short_name', 'escalation_minutes', 'height_unit');
  const units = await server.db('units').orderBy('id').select('call_sign', 'active');
  const settings = await server.db('settings').orderBy(['hospital_id', 'key']).select('value');
  return JSON.stringify([counts, cases, people, places, units, settings]);
}

interface Answer { status: number; body: { error?: { code: string; field?: string; issues?: Array<{ field: string }> } } & Record<string, unknown> }

const ALLOWED = new Set([200, 201, 204, 400, 403, 404, 409]);

/** The properties every answer must have, for accepted and refused input alike. */
function expectSafe(answer: Answer, what: string): void {
  expect(answer.status, `${what}: ${JSON.stringify(answer.body).slice(0, 300)}`).not.toBe(500);
  expect(ALLOWED.has(answer.status), `${what} gave ${answer.status}`).toBe(true);
  if (answer.status === 400) {
    const named = answer.body.error?.field ?? answer.body.error?.issues?.[0]?.field;
    expect(named, `${what}: a 400 without a field: ${JSON.stringify(answer.body)}`).toBeTruthy();
  }
  expect(({} as Record<string, unknown>).polluted).toBeUndefined();
}

async function send(client: SignedInClient, method: string, path: string, payload?: unknown): Promise<Answer> {
  const res =
    method === 'GET'
      ? await client.get(path)
      : await client.fetch(new URL(path, server.url), {
          method,
          headers: { accept: 'application/json', 'content-type': 'application/json', origin: server.url },
          body: payload === undefined ? undefined : JSON.stringify(payload),
        });
  const text = await res.text();
  let parsed: Answer['body'] = {};
  try {
    parsed = text && res.headers.get('content-type')?.includes('json') ? JSON.parse(text) : {};
  } catch {
    parsed = {};
  }
  return { status: res.status, body: parsed };
}

/**
 * Sends what the arbitrary makes; a refused request must leave every table as it was, an
 * accepted one is read back by `verify`.
 */
async function fuzz<T>(arbitrary: fc.Arbitrary<T>, request: (value: T) => Promise<Answer>, verify: (value: T, answer: Answer) => Promise<void> = async () => {}, runs = RUNS) {
  let accepted = 0;
  let refused = 0;
  await fc.assert(
    fc.asyncProperty(arbitrary, async (value) => {
      const before = await fingerprint();
      const answer = await request(value);
      expectSafe(answer, JSON.stringify(value)?.slice(0, 200) ?? String(value));
      if (answer.status >= 400) {
        refused++;
        expect(await fingerprint(), `refused ${answer.status} but the database changed`).toBe(before);
      } else {
        accepted++;
        await verify(value, answer);
      }
    }),
    { numRuns: runs, endOnFailure: true },
  );
  return { accepted, refused };
}

async function newCase(hospitalId: number): Promise<number> {
  const ack = await command<{ caseId: number }>(crewSocket, 'case:submit', { clientId: randomUUID(), hospitalId, etaMinutes: 12, clinical: { ageYears: 47, sex: 'male', fall: { heightM: 6, surface: 'concrete' } } });
  if (!ack.ok) throw new Error(ack.error.message);
  return ack.data.caseId;
}

beforeAll(async () => {
  // The crew's limits are raised here: these runs send hundreds of commands from one account to
  // test what each holds, not how many arrive (tests/integration/flood.test.ts does that).
  server = await startTestServer({ crewCommandLimits: { perAccountPerMinute: 100_000, perUnitPerMinute: 100_000 } }, { clock });
  [paramedic, nurse, lead, quality, admin] = await Promise.all(['paramedic', 'nurse', 'lead', 'quality', 'admin'].map((who) => signIn(server.url, `${who}@plumbline.test`)));
  const db = server.db;
  const general = (await db('hospitals').where({ short_name: 'Alderwick General' }).first('id')).id;
  const community = (await db('hospitals').where({ short_name: 'Fenmoor Community' }).first('id')).id;
  const agency = (await db('agencies').first('id')).id;
  const unit = (await db('units').where({ call_sign: 'Medic 12' }).first('id')).id;
  // Let the demo's first escalation pass happen now, not in the middle of a count.
  await new Promise((r) => setTimeout(r, 1100));
  await runEscalation(server.deps);
  crewSocket = await connectAs(server.url, paramedic);
  const liveCases = [];
  for (let i = 0; i < 4; i++) liveCases.push(await newCase(general));
  const closedCases = (await db('cases').where({ hospital_id: general, state: 'closed' }).orderBy('id').limit(6).pluck('id')) as number[];
  const draft = await (await admin.send('POST', '/api/policies', { hospitalId: general, from: 'example' })).json();
  ids = { general, community, agency, unit, nurse: (await db('users').where({ email: 'nurse@plumbline.test' }).first('id')).id, draft: draft.id, draftDocument: draft.document, liveCases, closedCases };
}, 60_000);
afterAll(async () => {
  crewSocket?.close();
  await server?.close();
});

// ---- Socket payloads ---------------------------------------------------------------------------

describe('the crew’s socket commands under random and hostile payloads', () => {
  const ackAnswer = (ack: Awaited<ReturnType<typeof command>>): Answer => {
    if (ack.ok) return { status: 200, body: ack.data as Record<string, unknown> };
    expect(ack.error.code, JSON.stringify(ack.error)).not.toBe('internal');
    const status = { invalid: 400, forbidden: 403, not_found: 404, conflict: 409 }[ack.error.code];
    expect(status, `unknown ack code ${ack.error.code}`).toBeDefined();
    return { status: status!, body: { error: ack.error } };
  };
  const storedRevisionIsValid = async (caseId: number) => {
    const row = await server.db('cases as c').join('case_revisions as r', function () { this.on('r.case_id', 'c.id').andOn('r.revision', 'c.current_revision'); }).where('c.id', caseId).first('r.input', 'r.notes', 'c.hospital_id');
    const input = typeof row.input === 'string' ? JSON.parse(row.input) : row.input;
    expect(ClinicalInput.safeParse(input).success).toBe(true);
    expect((row.notes ?? '').length).toBeLessThanOrEqual(2000);
    expect([ids.general, ids.community]).toContain(row.hospital_id);
  };

  it('case:submit', async () => {
    const shape = {
      clientId: fc.uuid({ version: 4 }),
      hospitalId: fc.constantFrom(ids.general, ids.community, 999_999),
      unitId: fc.option(fc.constant(ids.unit)),
      etaMinutes: fc.option(fc.integer({ min: 0, max: 600 })),
      notes: fc.string({ maxLength: 300 }),
      clinical,
    };
    const payload = bodyOrValid(shape, { hospitalId: fc.constantFrom(ids.general, ids.community), clinical: validClinical });
    const { accepted } = await fuzz(payload, async (p) => ackAnswer(await command(crewSocket, 'case:submit', p)), async (p, answer) => {
      expect(PreAlert.safeParse(p).success, `accepted ${JSON.stringify(p)}`).toBe(true);
      await storedRevisionIsValid((answer.body as { caseId: number }).caseId);
    }, 100);
    expect(accepted).toBeGreaterThan(0);
  });

  it('case:update', async () => {
    const shape = { caseId: fc.constantFrom(...ids.liveCases, ids.closedCases[0], 999_999), etaMinutes: fc.option(fc.integer({ min: 0, max: 600 })), notes: fc.string({ maxLength: 300 }), clinical };
    const payload = bodyOrValid(shape, { caseId: fc.constantFrom(...ids.liveCases), clinical: validClinical });
    const { accepted } = await fuzz(payload, async (p) => ackAnswer(await command(crewSocket, 'case:update', p)), async (p) => {
      expect(PreAlertUpdate.safeParse(p).success, `accepted ${JSON.stringify(p)}`).toBe(true);
      await storedRevisionIsValid((p as { caseId: number }).caseId);
    }, 80);
    expect(accepted).toBeGreaterThan(0);
  });

  it('case:redirect and case:cancel', async () => {
    const spare = [await newCase(ids.general), await newCase(ids.community)];
    const reason = fc.string({ minLength: 3, maxLength: 80 }).filter((s) => s.trim().length >= 3);
    await fuzz(body({ caseId: fc.constantFrom(...spare, 999_999), hospitalId: fc.constantFrom(ids.general, ids.community, 999_999), reason }), async (p) => ackAnswer(await command(crewSocket, 'case:redirect', p)), async (p) => {
      const row = await server.db('cases').where({ id: (p as { caseId: number }).caseId }).first('hospital_id', 'state');
      expect(row.hospital_id).toBe((p as { hospitalId: number }).hospitalId);
    });
    await fuzz(body({ caseId: fc.constantFrom(...spare, 999_999), reason }), async (p) => ackAnswer(await command(crewSocket, 'case:cancel', p)), async (p) => {
      const row = await server.db('cases').where({ id: (p as { caseId: number }).caseId }).first('state', 'cancel_reason');
      expect(row.state).toBe('cancelled');
      expect(row.cancel_reason.trim().length).toBeGreaterThanOrEqual(3);
    }, 40);
  });
});

// ---- REST bodies -------------------------------------------------------------------------------

describe('REST bodies under random and hostile values', () => {
  it.each(BOARD_ACTIONS)('board action %s', async (action) => {
    const current = 'CURRENT_ROW_VERSION';
    const shape: Record<string, fc.Arbitrary<unknown>> = { rowVersion: fc.oneof(fc.constant(current), fc.integer({ min: 1, max: 50 })) };
    if (action === 'decide') Object.assign(shape, { level, reason: fc.string({ maxLength: 60 }) });
    if (action === 'close') shape.reason = fc.string({ maxLength: 60 });
    if (action === 'bay') shape.bay = fc.string({ minLength: 1, maxLength: 50 });
    if (action === 'arrived' || action === 'team-at-bedside') shape.at = fc.integer({ min: clock.t - 3 * 3600_000, max: clock.t + 3600_000 });
    const target = fc.tuple(fc.constantFrom(...ids.liveCases, ...ids.liveCases, ids.closedCases[0], 999_999), body(shape));
    let sent: unknown;
    await fuzz(target, async ([caseId, payload]) => {
      const row = await server.db('cases').where({ id: caseId }).first('row_version');
      const filled = payload && typeof payload === 'object' && (payload as Record<string, unknown>).rowVersion === current ? { ...(payload as object), rowVersion: row?.row_version ?? 1 } : payload;
      sent = filled;
      return send(nurse, 'POST', `/api/cases/${caseId}/${action}`, filled);
    }, async ([caseId]) => {
      expect(BOARD_ACTION_SCHEMAS[action].safeParse(sent).success, `accepted ${JSON.stringify(sent)}`).toBe(true);
      const summary = (await (await nurse.get(`/api/cases/${caseId}`)).json()).case;
      expect(['full', 'limited', 'consult', 'none', null]).toContain(summary.decidedLevel);
      expect(summary.bay === null || (summary.bay.length >= 1 && summary.bay.length <= 40 && summary.bay === summary.bay.trim())).toBe(true);
      expect(summary.decidedReason === null || summary.decidedReason.length <= 500).toBe(true);
      for (const at of [summary.arrivedAt, summary.teamAtBedsideAt]) expect(at === null || (Number.isSafeInteger(at) && at <= clock.t + 2 * 60_000)).toBe(true);
    }, 40);
  });

  it('review sign-off, flag and closing a discussion', async () => {
    const comment = fc.string({ maxLength: 100 });
    const reviewOf = async (caseId: number) => server.db('reviews').where({ case_id: caseId }).orderBy('id', 'desc').first();
    await fuzz(fc.tuple(fc.constantFrom(...ids.closedCases, 999_999), fc.constantFrom('sign-off', 'flag'), body({ comment })), ([caseId, kind, payload]) => send(lead, 'POST', `/api/review/cases/${caseId}/${kind}`, payload), async ([caseId]) => {
      const review = await reviewOf(caseId);
      expect(review.comment === null || review.comment.length <= 2000).toBe(true);
    });
    const flagged = (await server.db('reviews').where({ status: 'flagged' }).pluck('id')) as number[];
    await fuzz(fc.tuple(fc.constantFrom(...flagged, 999_999), body({ outcome: comment })), ([id, payload]) => send(lead, 'POST', `/api/review/reviews/${id}/close`, payload), async ([id]) => {
      const review = await server.db('reviews').where({ id }).first();
      expect(review.outcome.trim().length).toBeGreaterThanOrEqual(3);
    }, 40);
  });

  it('response-time settings', async () => {
    const payload = body({ hospitalId: fc.constantFrom(ids.general, ids.community, 999_999), targetMinutes: fc.integer({ min: 1, max: 120 }), compliance: fc.double({ min: 0.05, max: 1, noNaN: true }) });
    await fuzz(payload, (p) => send(admin, 'PUT', '/api/review/settings', p), async (p) => {
      const settings = await (await admin.get(`/api/review/settings?hospitalId=${(p as { hospitalId: number }).hospitalId}`)).json();
      expect(ResponseSettings.safeParse(settings).success).toBe(true);
    });
  });

  it('policy drafts: create, save and publish', async () => {
    await fuzz(body({ hospitalId: fc.constantFrom(ids.general, 999_999), from: fc.oneof(fc.constantFrom('in-force', 'example'), fc.constant(ids.draft), fc.integer({ min: 1, max: 1_000_000 })) }), (p) => send(admin, 'POST', '/api/policies', p), async (_p, answer) => {
      expect(answer.status).toBe(201);
      const row = await server.db('policy_versions').where({ id: answer.body.id }).first('document', 'status');
      expect(Policy.safeParse(JSON.parse(row.document)).success).toBe(true);
      expect(row.status).toBe('draft');
    }, 40);
    const levelRow = fc.record({ id: field(level), name: field(fc.string({ minLength: 1, maxLength: 70 })) });
    const rule = fc.record({ level: field(level), criteria: field(fc.array(field(fc.constantFrom('policy:sbp-below-90-age-10-up', 'field-2021:penetrating-injury', 'made-up:criterion')), { maxLength: 3 })), note: field(fc.string({ maxLength: 20 })) }, { requiredKeys: [] });
    const save = body({ name: fc.string({ minLength: 1, maxLength: 220 }), note: fc.string({ maxLength: 50 }), levels: fc.array(levelRow, { maxLength: 5 }), rules: fc.array(rule, { maxLength: 4 }) });
    await fuzz(fc.tuple(fc.constantFrom(ids.draft, 999_999), save), ([id, p]) => send(admin, 'PUT', `/api/policies/${id}`, p), async ([id]) => {
      const row = await server.db('policy_versions').where({ id }).first('document');
      expect(Policy.safeParse(JSON.parse(row.document)).success).toBe(true);
    }, 100);
    await fuzz(fc.tuple(fc.constantFrom(999_999, ids.draft), body({ effectiveFrom: fc.integer({ min: clock.t - 1000, max: clock.t + 86_400_000 }) })), ([id, p]) => send(lead, 'POST', `/api/policies/${id}/publish`, p), async () => {}, 40);
    // Approved (by the lead, who did not write it), publishing reaches the effective date itself:
    // times past what a date can hold, before 2000 or after 2100 are refused naming the field.
    const { name, note, levels, rules } = ids.draftDocument as { name: string; note?: string; levels: unknown[]; rules: unknown[] };
    expect((await admin.send('PUT', `/api/policies/${ids.draft}`, { name, note, levels, rules })).status).toBe(200);
    expect((await lead.send('POST', `/api/policies/${ids.draft}/approve`)).status).toBe(200);
    const farFuture = fc.integer({ min: Date.UTC(2099, 0, 1), max: Date.UTC(2100, 11, 31) });
    const tooFar = fc.constantFrom(8.64e15 + 1, 9e15, Number.MAX_SAFE_INTEGER, 1e300, Date.UTC(2101, 0, 1), Date.UTC(1999, 11, 31), -1, 0);
    // Always with a date: left out, it would mean now, and put this fuzzed version in force.
    const publishBody = fc.record({ effectiveFrom: fc.oneof({ weight: 4, arbitrary: tooFar }, { weight: 1, arbitrary: farFuture }, { weight: 1, arbitrary: hostile }) });
    const published = await fuzz(fc.tuple(fc.constant(ids.draft), publishBody), ([id, p]) => send(lead, 'POST', `/api/policies/${id}/publish`, p), async (_v, answer) => {
      expect(answer.body.status).toBe('published');
      expect(answer.body.effectiveFrom).toBeGreaterThanOrEqual(Date.UTC(2099, 0, 1));
    }, 40);
    expect(published.refused).toBeGreaterThan(0);
  });

  it('people: new and changed users', async () => {
    const email = fc.oneof(fc.emailAddress(), fc.constantFrom('nurse@plumbline.test', 'not-an-address', 'a@b', `${'x'.repeat(330)}@plumbline.test`));
    const roles = fc.array(field(fc.constantFrom('paramedic', 'charge_nurse', 'trauma_lead', 'quality', 'admin', 'root')), { maxLength: 3 });
    const memberships = fc.array(field(fc.record({ kind: field(fc.constantFrom('hospital', 'agency')), id: field(fc.constantFrom(ids.general, ids.community, ids.agency, 999_999)) })), { maxLength: 3 });
    const person = body({ email, name: fc.string({ minLength: 1, maxLength: 210 }), roles, memberships });
    const readBack = async (userId: number) => {
      const user = await server.db('users').where({ id: userId }).first('email', 'name');
      const userRoles = await server.db('user_roles').where({ user_id: userId }).pluck('role');
      const places = await server.db('memberships').where({ user_id: userId }).select('hospital_id', 'agency_id');
      const stored = { email: user.email, name: user.name, roles: userRoles, memberships: places.map((m) => (m.hospital_id ? { kind: 'hospital', id: m.hospital_id } : { kind: 'agency', id: m.agency_id })) };
      expect(CreateUser.safeParse(stored).success, JSON.stringify(stored)).toBe(true);
      expect(user.name).toBe(user.name.trim());
      // Stored as shown: no control character or bidirectional override, and something visible.
      expect(cleanText(user.name)).toBe(user.name);
      expect(hasVisibleText(user.name)).toBe(true);
    };
    await fuzz(person, (p) => send(admin, 'POST', '/api/people/users', p), async (_p, answer) => readBack(answer.body.id as number), 100);
    const someone = (await (await admin.send('POST', '/api/people/users', { email: 'fuzz.target@plumbline.test', name: 'Fuzz Target', roles: ['quality'], memberships: [{ kind: 'hospital', id: ids.community }] })).json()).id as number;
    await fuzz(fc.tuple(fc.constantFrom(someone, 999_999), person), ([id, p]) => send(admin, 'PATCH', `/api/people/users/${id}`, p), async ([id]) => readBack(id), 100);
  });

  it('people: hospitals, agencies, units and destinations', async () => {
    const lists = fc.record({ full: fc.array(fc.oneof(fc.emailAddress(), fc.string()), { maxLength: 3 }), limited: fc.array(fc.emailAddress(), { maxLength: 2 }), consult: fc.constant([]), escalation: field(fc.array(fc.emailAddress(), { maxLength: 2 })) }, { requiredKeys: [] });
    const hospital = body({ name: fc.string({ minLength: 1, maxLength: 210 }), shortName: fc.string({ minLength: 1, maxLength: 45 }), traumaLevel: fc.constantFrom('I', 'II', 'III', 'IV', 'none', 'V'), heightUnit: fc.constantFrom('m', 'ft', 'storeys', 'yards'), escalationMinutes: fc.integer({ min: -5, max: 90 }), lists });
    const checkHospital = async (id: number) => {
      const row = ((await (await admin.get('/api/people/hospitals')).json()) as Array<{ id: number }>).find((h) => h.id === id)!;
      const { id: _id, ...fields } = row;
      expect(HospitalFields.safeParse(fields).success, JSON.stringify(fields)).toBe(true);
    };
    await fuzz(hospital, (p) => send(admin, 'POST', '/api/people/hospitals', p), async (_p, answer) => checkHospital(answer.body.id as number), 80);
    await fuzz(fc.tuple(fc.constantFrom(ids.community, 999_999), hospital), ([id, p]) => send(admin, 'PATCH', `/api/people/hospitals/${id}`, p), async ([id]) => checkHospital(id), 80);

    const text40 = fc.string({ minLength: 1, maxLength: 45 });
    const agencyRow = async () => (await (await admin.get('/api/people/agencies')).json()).agencies.find((a: { id: number }) => a.id === ids.agency);
    await fuzz(fc.tuple(fc.constantFrom(ids.agency, 999_999), body({ name: fc.string({ minLength: 1, maxLength: 210 }) })), ([id, p]) => send(admin, 'PATCH', `/api/people/agencies/${id}`, p), async () => {
      const agency = await agencyRow();
      expect(agency.name.length).toBeGreaterThan(0);
      expect(agency.name.length).toBeLessThanOrEqual(200);
    }, 40);
    await fuzz(fc.tuple(fc.constantFrom(ids.agency, 999_999), body({ callSign: text40 })), ([id, p]) => send(admin, 'POST', `/api/people/agencies/${id}/units`, p), async () => {
      for (const unit of (await agencyRow()).units) expect(unit.callSign.trim().length).toBeGreaterThan(0);
    }, 40);
    await fuzz(fc.tuple(fc.constantFrom(ids.unit, 999_999), body({ callSign: text40, active: fc.boolean() })), ([id, p]) => send(admin, 'PATCH', `/api/people/units/${id}`, p), async () => {
      const unit = (await agencyRow()).units.find((u: { id: number }) => u.id === ids.unit);
      expect(unit.callSign.length).toBeLessThanOrEqual(40);
    }, 40);
    await fuzz(fc.tuple(fc.constantFrom(ids.agency, 999_999), body({ hospitalIds: fc.array(fc.constantFrom(ids.general, ids.community, 999_999), { maxLength: 3 }) })), ([id, p]) => send(admin, 'PUT', `/api/people/agencies/${id}/destinations`, p), async () => {
      for (const h of (await agencyRow()).destinations) expect([ids.general, ids.community]).toContain(h);
    }, 40);
    // Leave the crew able to reach both hospitals for the tests after this one.
    await admin.send('PUT', `/api/people/agencies/${ids.agency}/destinations`, { hospitalIds: [ids.general, ids.community] });
  });

  it('quality targets and the what-if run', async () => {
    const fraction = fc.double({ min: -0.5, max: 1.5, noNaN: true });
    await fuzz(body({ hospitalId: fc.constantFrom(ids.general, 999_999), targets: body({ underTriageMax: fraction, overTriageHospital: fc.tuple(fraction, fraction), overTriageSystemMax: fraction }) }), (p) => send(quality, 'PUT', '/api/quality/targets', p), async () => {
      const { targets } = await (await quality.get(`/api/quality/targets?hospitalId=${ids.general}`)).json();
      expect(TargetsInput.safeParse(targets).success).toBe(true);
    });
    const date = fc.oneof(fc.date({ min: new Date('2025-01-01'), max: new Date('2027-12-31'), noInvalidDate: true }).map((d) => d.toISOString().slice(0, 10)), fc.constantFrom('2026-02-30', '0000-01-01', '99999-01-01', '2026-13-01'));
    await fuzz(body({ hospitalId: fc.constantFrom(ids.general, 999_999), from: date, to: date, standard: fc.constantFrom('iss', 'nfti', 'iss-or-nfti', 'gut'), basis: fc.constantFrom('decided', 'recommended'), timeZone: fc.constantFrom('UTC', 'Europe/London', 'America/New_York', 'Mars/Olympus'), policy: fc.oneof(fc.constant('in-force'), fc.constant(ids.draft)) }), (p) => send(lead, 'POST', '/api/quality/what-if', p), async () => {}, 40);
  });
});

// ---- Queries and route ids ---------------------------------------------------------------------

describe('query strings and route ids under random and hostile values', () => {
  const queryValue = fc.oneof(fc.string({ maxLength: 12 }), fc.constantFrom('1', '-1', '0', '1.5', '1e999', 'NaN', '99999999999999999999', '2026-01-01', '2026-02-30', '1000-01-01', '1999-12-31', '2101-01-01', '3026-12-31', '0001-01-01', 'true', 'yes', 'UTC', 'Etc/GMT+99', 'full', 'a', 'all', 'open', '__proto__'), fc.integer({ min: 1, max: 3 }).map(String));
  const query = (keys: string[]) =>
    fc.array(fc.tuple(fc.constantFrom(...keys, '__proto__', 'constructor', 'x[y]'), queryValue), { maxLength: 8 }).map((pairs) => new URLSearchParams(pairs).toString());

  const READS: Array<[string, SignedInClient | (() => SignedInClient), string[]]> = [
    ['/api/cases', () => nurse, ['state']],
    ['/api/board', () => nurse, ['hospitalId', 'changesSince']],
    ['/api/mail', () => admin, ['limit']],
    ['/api/policies', () => lead, ['hospitalId']],
    ['/api/review/cases', () => lead, ['hospitalId', 'from', 'to', 'timeZone', 'decided', 'differs', 'below', 'overdue', 'slowTeam', 'review', 'sort', 'dir', 'page', 'pageSize']],
    ['/api/review/cases.csv', () => quality, ['hospitalId', 'from', 'to', 'sort', 'dir', 'below']],
    ['/api/review/discussion', () => lead, ['hospitalId']],
    ['/api/review/compliance', () => lead, ['hospitalId', 'from', 'to', 'timeZone']],
    ['/api/review/settings', () => lead, ['hospitalId']],
    ['/api/quality/report', () => quality, ['hospitalId', 'from', 'to', 'standard', 'basis', 'timeZone']],
    ['/api/quality/report.csv', () => quality, ['hospitalId', 'from', 'to', 'standard', 'basis', 'timeZone']],
    ['/api/quality/cases', () => quality, ['hospitalId', 'from', 'to', 'cell', 'month', 'agencyId', 'band', 'criterion', 'timeZone']],
    ['/api/quality/policies', () => quality, ['hospitalId']],
    ['/api/quality/targets', () => quality, ['hospitalId']],
    ['/api/paging/board', () => nurse, ['hospitalId']],
    ['/api/paging/intervals', () => lead, ['hospitalId', 'from', 'to', 'days']],
    ['/api/messages', () => admin, ['limit']],
  ];

  it.each(READS.map(([path, who, keys]) => [path, who, keys] as const))('GET %s', async (path, who, keys) => {
    const client = typeof who === 'function' ? who() : who;
    // The hospital is usually there and right, so the other keys get past it to their own checks.
    const withHospital = fc.tuple(fc.boolean(), query(keys)).map(([right, q]) => (right && keys.includes('hospitalId') ? `hospitalId=${ids.general}&from=2026-01-01&to=2026-12-31&${q}` : q));
    await fuzz(withHospital, (q) => send(client, 'GET', `${path}?${q}`), async () => {}, 60);
  });

  const badIds = fc.oneof(fc.constantFrom('abc', '-1', '0', '1.5', '1e400', '99999999999999999999', '0x10', '%00', '%20', 'null', 'NaN', '1;select', '%E2%80%AE1', '9007199254740993', ' 1 '), fc.string({ maxLength: 10 }).map(encodeURIComponent)).filter((id) => !/^[1-9][0-9]*$/.test(id));
  const ROUTES_WITH_IDS: Array<[string, string, () => SignedInClient, unknown]> = [
    ['GET', '/api/cases/:id', () => nurse, undefined],
    ['GET', '/api/review/cases/:id', () => lead, undefined],
    ['POST', '/api/review/cases/:id/sign-off', () => lead, {}],
    ['POST', '/api/review/reviews/:id/close', () => lead, { outcome: 'Talked it through' }],
    ['GET', '/api/policies/:id', () => lead, undefined],
    ['PUT', '/api/policies/:id', () => admin, { name: 'x', levels: [], rules: [] }],
    ['DELETE', '/api/policies/:id', () => admin, undefined],
    ['POST', '/api/policies/:id/approve', () => lead, undefined],
    ['PATCH', '/api/people/users/:id', () => admin, { name: 'Someone' }],
    ['POST', '/api/people/users/:id/deactivate', () => admin, undefined],
    ['PATCH', '/api/people/hospitals/:id', () => admin, { escalationMinutes: 5 }],
    ['POST', '/api/people/agencies/:id/units', () => admin, { callSign: 'Medic 99' }],
    ['PATCH', '/api/people/units/:id', () => admin, { active: true }],
    ['POST', '/api/cases/:id/acknowledge', () => nurse, { rowVersion: 1 }],
    ['GET', '/api/paging/hospitals/:id', () => admin, undefined],
    ['PUT', '/api/paging/contacts/:id', () => admin, { email: null, mobile: null }],
  ];
  it.each(ROUTES_WITH_IDS)('%s %s with a hostile id', async (method, route, who, payload) => {
    await fuzz(badIds, (id) => send(who(), method, route.replace(':id', id), payload), async () => {}, 30);
  });

  it('whole bodies that are not objects: arrays, strings, numbers, null, broken JSON and no body at all', async () => {
    const raw = fc.constantFrom('[]', '[1,2]', '"text"', '42', 'null', 'true', '{', '{"a":', '{"__proto__":{"polluted":true}}', '{"constructor":{"prototype":{"polluted":true}}}', '');
    const targets: Array<[string, string, SignedInClient]> = [
      ['POST', '/api/people/users', admin],
      ['POST', '/api/people/agencies', admin],
      ['PUT', '/api/review/settings', admin],
      ['PUT', '/api/quality/targets', quality],
      ['POST', '/api/quality/what-if', lead],
      ['POST', `/api/cases/${ids.liveCases[0]}/bay`, nurse],
      ['POST', `/api/review/cases/${ids.closedCases[1]}/flag`, lead],
    ];
    await fuzz(fc.tuple(fc.constantFrom(...targets), raw), async ([[method, path, client], text]) => {
      const res = await client.fetch(new URL(path, server.url), { method, headers: { accept: 'application/json', 'content-type': 'application/json', origin: server.url }, body: text || undefined });
      return { status: res.status, body: await res.json() };
    }, async () => {}, 60);
  });
});

// ---- Oversize and wrong files ------------------------------------------------------------------

describe('oversize bodies and uploads', () => {
  it('refuses a JSON body over 256 kB with 413 in the JSON error shape, storing nothing', async () => {
    const before = await fingerprint();
    const res = await admin.send('POST', '/api/people/agencies', { name: 'Big Agency', padding: 'x'.repeat(300 * 1024) });
    expect(res.status).toBe(413);
    expect(await res.json()).toEqual({ error: { code: 'too_large', message: 'The request body is too large.' } });
    expect(await fingerprint()).toBe(before);
  });

  const upload = (name: string, type: string, content: Buffer | string) => {
    const form = new FormData();
    form.set('hospitalId', String(ids.general));
    form.set('file', new Blob([typeof content === 'string' ? content : new Uint8Array(content)], { type }), name);
    return quality.fetch(new URL('/api/quality/outcomes/preview', server.url), { method: 'POST', headers: { origin: server.url }, body: form });
  };

  it('refuses an outcome file over the import limit with 413 naming the file', async () => {
    const res = await upload('outcomes.csv', 'text/csv', Buffer.alloc(OUTCOME_FILE_MAX_BYTES + 1024, 'a'));
    expect(res.status).toBe(413);
    expect((await res.json()).error).toMatchObject({ code: 'too_large', field: 'file' });
  });

  it('refuses a file that is not CSV with 415', async () => {
    const res = await upload('scan.png', 'image/png', Buffer.from([0x89, 0x50, 0x4e, 0x47]));
    expect(res.status).toBe(415);
    expect((await res.json()).error).toEqual({ code: 'not_csv', message: 'scan.png is not a CSV file; export the registry data as .csv and choose that file.' });
  });

  it('a socket payload over the transport limit closes that connection and stores no case', async () => {
    const socket = await connectAs(server.url, paramedic);
    const before = await server.db('cases').count({ n: '*' }).first();
    const closed = new Promise<string>((resolve) => socket.once('disconnect', (reason) => resolve(reason)));
    socket.emit('case:submit', { clientId: randomUUID(), hospitalId: ids.general, notes: 'x'.repeat(1_200_000), clinical: { ageYears: 30, fall: { heightM: 2 } } } as never, () => {});
    expect(await closed).toBe('transport close');
    expect(await server.db('cases').count({ n: '*' }).first()).toEqual(before);
  });
});

// ---- CSV injection -----------------------------------------------------------------------------

describe('formula cells in every CSV export', () => {
  const cells = (csv: string) => parseCsv(csv.replace(/^\uFEFF/, ''), { relax_column_count: true }) as string[][];
  const FORMULA = /^[=+\-@\t\r]/;

  it('the review table, the quality report and the template start no text cell with = + - @', async () => {
    const caseId = await newCase(ids.general);
    const shown = (await (await nurse.get(`/api/cases/${caseId}`)).json()).case;
    const acked = (await (await nurse.send('POST', `/api/cases/${caseId}/acknowledge`, { rowVersion: shown.rowVersion })).json()).case;
    const hyperlink = '=HYPERLINK("http://attacker.invalid","Open")';
    const lower = shown.recommendedLevel === 'none' ? null : 'none';
    const decided = await nurse.send('POST', `/api/cases/${caseId}/decide`, { rowVersion: acked.rowVersion, level: lower ?? 'full', reason: hyperlink });
    expect(decided.status).toBe(200);
    expect((await admin.send('PATCH', `/api/people/hospitals/${ids.general}`, { name: '+cmd|" /C calc"!A0' })).status).toBe(200);
    expect((await admin.send('PATCH', `/api/people/agencies/${ids.agency}`, { name: '-2+3+cmd|" /C calc"!A0' })).status).toBe(200);
    expect((await admin.send('PATCH', `/api/people/users/${ids.nurse}`, { name: '@SUM(1+1)*cmd' })).status).toBe(200);
    const unitCase = await server.db('cases').where({ id: caseId }).first('unit_id');
    if (unitCase.unit_id) expect((await admin.send('PATCH', `/api/people/units/${unitCase.unit_id}`, { callSign: '@unit' })).status).toBe(200);

    const review = await lead.get(`/api/review/cases.csv?hospitalId=${ids.general}`);
    expect(review.status).toBe(200);
    const table = cells(await review.text());
    const header = table[0];
    const line = table.find((row) => row[header.indexOf('case')] === shown.caseNumber)!;
    expect(line[header.indexOf('reason')]).toBe(`'${hyperlink}`);
    expect(line[header.indexOf('hospital')]).toBe(`'+cmd|" /C calc"!A0`);
    expect(line[header.indexOf('agency')]).toBe(`'-2+3+cmd|" /C calc"!A0`);
    expect(line[header.indexOf('decided by')]).toBe(`'@SUM(1+1)*cmd`);

    const day = new Date(clock.t).toISOString().slice(0, 10);
    const report = await quality.get(`/api/quality/report.csv?hospitalId=${ids.general}&from=2025-01-01&to=${day}`);
    expect(report.status).toBe(200);
    const reportCells = cells(await report.text());
    expect(reportCells.find((row) => row[0] === 'report')![1]).toBe(`'+cmd|" /C calc"!A0`);
    expect(reportCells.filter((row) => row[0] === 'agency').map((row) => row[1])).toContain(`'-2+3+cmd|" /C calc"!A0`);

    const template = await quality.get('/api/quality/outcomes/template.csv');
    const templateCells = cells(await template.text());
    for (const table of [cells(await (await lead.get(`/api/review/cases.csv?hospitalId=${ids.general}`)).text()), reportCells, templateCells]) {
      for (const row of table) for (const cell of row) expect(FORMULA.test(cell) && !/^-?\d+(\.\d+)?$/.test(cell), `cell ${JSON.stringify(cell)}`).toBe(false);
    }
  });
});

describe('avoidable server errors', () => {
  it('a state-changing request with any Referer and no Origin: refused as from another site unless it names this site', async () => {
    const printable = fc.stringMatching(/^[\x20-\x7e]{0,60}$/);
    const referer = fc.oneof(printable, printable.map((tail) => `http://${tail}`), fc.constantFrom('http://[::1', '::not a url::', 'http://%zz', 'https://', '//', 'javascript:alert(1)', `${server.url}/board`));
    const before = await fingerprint();
    await fc.assert(
      fc.asyncProperty(referer, async (value) => {
        const res = await nurse.fetch(new URL(`/api/cases/${ids.liveCases[0]}/bay`, server.url), { method: 'POST', headers: { accept: 'application/json', 'content-type': 'application/json', referer: value }, body: '{}' });
        const answer = { status: res.status, body: await res.json() };
        expectSafe(answer, `Referer ${JSON.stringify(value)}`);
        const ours = URL.canParse(value) && new URL(value).origin === new URL(server.url).origin;
        expect(answer.status, value).toBe(ours ? 400 : 403);
      }),
      { numRuns: 60 },
    );
    expect(await fingerprint()).toBe(before);
  });

  it('report and review ranges past the bounds: 400 naming the field, never a long query', async () => {
    const answers = await Promise.all([
      quality.get(`/api/quality/report?hospitalId=${ids.general}&from=1026-01-01&to=3026-12-31`),
      quality.get(`/api/quality/report?hospitalId=${ids.general}&from=2000-01-01&to=2100-12-31`),
      quality.get(`/api/quality/cases?hospitalId=${ids.general}&from=2010-01-01&to=2026-12-31`),
      lead.get(`/api/review/cases?hospitalId=${ids.general}&from=1970-01-01`),
      lead.get(`/api/review/compliance?hospitalId=${ids.general}&from=2001-01-01&to=2099-01-01`),
      lead.send('POST', '/api/quality/what-if', { hospitalId: ids.general, from: '2000-01-01', to: '2090-12-31', policy: 'in-force' }),
    ]);
    const bodies = await Promise.all(answers.map(async (r) => ({ status: r.status, field: (await r.json()).error?.field })));
    expect(bodies).toEqual([
      { status: 400, field: 'from' },
      { status: 400, field: 'to' },
      { status: 400, field: 'to' },
      { status: 400, field: 'from' },
      { status: 400, field: 'to' },
      { status: 400, field: 'to' },
    ]);
    // Ten years to the day is the longest range, and it is answered.
    expect((await quality.get(`/api/quality/report?hospitalId=${ids.general}&from=2016-12-31&to=2026-12-31`)).status).toBe(200);
  });

  it('a deactivated person whose identity-provider session is still live gets the sign-in page, never a server error', async () => {
    const created = await admin.send('POST', '/api/people/users', { email: 'fuzz.leaver@plumbline.test', name: 'Fuzz Leaver', roles: ['quality'], memberships: [{ kind: 'hospital', id: ids.community }] });
    const id = (await created.json()).id as number;
    expect((await admin.send('POST', `/api/people/users/${id}/password`, { password: 'a-long-test-password' })).status).toBe(200);
    for (const how of ['by the administrator', 'behind the application’s back'] as const) {
      const client = await signIn(server.url, 'fuzz.leaver@plumbline.test', 'a-long-test-password');
      if (how === 'by the administrator') expect((await admin.send('POST', `/api/people/users/${id}/deactivate`)).status).toBe(200);
      else await server.db('users').where({ id }).update({ active: false });
      for (const path of ['/auth/login', '/auth/login?returnTo=%2Fboard', '/api/me', '/api/cases']) {
        const res = await client.fetch(new URL(path, server.url), { headers: { accept: path.startsWith('/api') ? 'application/json' : 'text/html' } });
        expect(res.status, `${how}: ${path}`).toBeLessThan(500);
      }
      await server.db('users').where({ id }).update({ active: true });
    }
  });
});

describe('after all of it', () => {
  it('the audit chain still verifies', async () => {
    const chain = await verifyAuditChain(server.db);
    expect(chain.ok).toBe(true);
    expect(chain.rows).toBeGreaterThan(100);
  });
});
