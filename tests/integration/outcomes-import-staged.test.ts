import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { abandonStagedImports } from '../../server/services/outcomes/store';
import { verifyAuditChain } from '../../server/services/audit/audit';
import { addClosedCases, outcomesCsv } from '../bench/support/closed-cases';
import { onPostgres } from '../support/database';
import { startTestServer, type TestServer } from '../support/server';
import { signIn, type SignedInClient } from '../support/sign-in';
import { command, connectAs, type TestSocket } from '../support/socket';

// A large outcomes import shares the one database connection with pre-alerts: it is staged in
// short transactions that let them through, and made visible all at once, or not at all. How
// long pre-alerts wait meanwhile is a benchmark figure (tests/bench/import-during-prealerts.ts).

// 34-year-old, SBP 84 < 90 (2021 guideline, Newgard 2022 [source]): full under the example policy.
const FULL = { ageYears: 34, sex: 'male', fall: { heightM: 4 }, vitals: { sbp: 84, hr: 120 } };

let server: TestServer;
let quality: SignedInClient;
let crew: TestSocket;
let general: number;

beforeAll(async () => {
  // One crew account sends pre-alerts throughout the import: lift the flood limits for it.
  server = await startTestServer({ crewCommandLimits: { perAccountPerMinute: 10_000, perUnitPerMinute: 10_000 } });
  general = (await server.db('hospitals').where({ short_name: 'Alderwick General' }).first('id')).id;
  quality = await signIn(server.url, 'quality@plumbline.test');
  crew = await connectAs(server.url, await signIn(server.url, 'paramedic@plumbline.test'));
}, 30_000);

afterAll(async () => {
  crew?.close();
  await server?.close();
});

function postImport(csv: string): Promise<Response> {
  const form = new FormData();
  form.set('hospitalId', String(general));
  form.set('file', new Blob([csv], { type: 'text/csv' }), 'registry.csv');
  return quality.fetch(new URL('/api/quality/outcomes/import', server.url), { method: 'POST', body: form, headers: { origin: new URL(server.url).origin, accept: 'application/json' } });
}

const importedOutcomes = async () => Number((await server.db('outcomes').where('batch', 'like', 'imp-%').count({ n: '*' }).first())?.n);
const staged = async () => Number((await server.db('outcome_staging').count({ n: '*' }).first())?.n);

describe('a 3,000-row import', () => {
  it('lets pre-alerts through while it is saved, and nobody ever sees part of it', async () => {
    const numbers = await addClosedCases(server.db, general, 3000);
    const before = await importedOutcomes();
    let done = false;
    const importing = postImport(outcomesCsv(numbers)).finally(() => (done = true));

    // While it runs: a second import for the same hospital waits its turn (409), pre-alerts are
    // answered, and every look at the outcomes sees none of the file or all of it.
    const second = await postImport(outcomesCsv(numbers.slice(0, 10)));
    expect(second.status).toBe(409);
    expect((await second.json()).error.code).toBe('import_running');
    const seen = new Set<number>();
    let answeredDuring = 0;
    let sawStaging = false;
    while (!done) {
      const answer = await command(crew, 'case:submit', { clientId: randomUUID(), hospitalId: general, etaMinutes: 9, clinical: FULL });
      expect(answer.ok).toBe(true);
      if (!done) answeredDuring++;
      seen.add((await importedOutcomes()) - before);
      if ((await staged()) > 0) sawStaging = true;
    }
    const res = await importing;
    expect(res.status, await res.clone().text()).toBe(201);
    expect(await res.json()).toMatchObject({ saved: 3000, created: 3000, updated: 0 });
    // The import was under way across several of those looks: it did not hold the connection.
    expect(answeredDuring).toBeGreaterThan(1);
    expect(sawStaging).toBe(true);
    expect([...seen].every((n) => n === 0 || n === 3000)).toBe(true);
    expect(seen.has(0)).toBe(true);
    expect((await importedOutcomes()) - before).toBe(3000);
    expect(await staged()).toBe(0);

    // Audited: one row per case, then the batch's row that made them count.
    const { batch } = (await server.db('outcomes').where('batch', 'like', 'imp-%').first('batch')) as { batch: string };
    const saved = await server.db('audit_log').where({ action: 'outcome.batch-saved', entity_id: batch }).first();
    expect(JSON.parse(saved.after)).toEqual({ batch, hospitalId: general, created: 3000, updated: 0 });
    const perCase = Number((await server.db('audit_log').where({ action: 'outcome.imported' }).where('after', 'like', `%"batch":"${batch}"%`).count({ n: '*' }).first())?.n);
    expect(perCase).toBe(3000);
    expect(await verifyAuditChain(server.db)).toMatchObject({ ok: true });
  }, 120_000);
});

describe('an import that fails half-way', () => {
  it('changes no outcome, leaves nothing staged, and is recorded as abandoned', async () => {
    // Cases of the earlier import, given a new ISS: a failure on the way must leave the old one.
    const cases = await server.db('outcomes').where('batch', 'like', 'imp-%').orderBy('case_id').limit(600).select('case_id', 'iss');
    const caseNumbers = (await server.db('cases').whereIn('id', cases.map((c) => c.case_id)).orderBy('id').select('case_number')).map((c) => c.case_number as string);
    const failAt = cases[450].case_id;
    // The disk fills, say, at the tenth chunk: here a trigger refuses that row.
    if (onPostgres) {
      await server.db.raw(`CREATE FUNCTION staging_fails() RETURNS trigger AS $$ BEGIN RAISE EXCEPTION 'disk I/O error'; END $$ LANGUAGE plpgsql`);
      await server.db.raw(`CREATE TRIGGER staging_fails BEFORE INSERT ON outcome_staging FOR EACH ROW WHEN (NEW.case_id = ${failAt}) EXECUTE FUNCTION staging_fails()`);
    } else {
      await server.db.raw(`CREATE TRIGGER staging_fails BEFORE INSERT ON outcome_staging WHEN NEW.case_id = ${failAt} BEGIN SELECT RAISE(ABORT, 'disk I/O error'); END`);
    }
    try {
      const res = await postImport(`case_number,iss\n${caseNumbers.map((n) => `${n},16`).join('\n')}\n`);
      expect(res.status).toBe(500);
    } finally {
      await server.db.raw(onPostgres ? 'DROP TRIGGER staging_fails ON outcome_staging' : 'DROP TRIGGER staging_fails');
      if (onPostgres) await server.db.raw('DROP FUNCTION staging_fails()');
    }
    const after = await server.db('outcomes').whereIn('case_id', cases.map((c) => c.case_id)).orderBy('case_id').select('case_id', 'iss');
    expect(after).toEqual(cases);
    expect(await staged()).toBe(0);
    const abandoned = await server.db('audit_log').where({ action: 'outcome.batch-abandoned' }).orderBy('id', 'desc').first();
    expect(JSON.parse(abandoned.after)).toMatchObject({ hospitalId: general, staged: 450 });
  }, 60_000);

  it('rows staged by a server that stopped mid-import are recorded as abandoned at the next start', async () => {
    const caseId = (await server.db('outcomes').where('batch', 'like', 'imp-%').first('case_id')).case_id;
    const outcome = await server.db('outcomes').where({ case_id: caseId }).first();
    await server.db('outcome_staging').insert({ batch: 'imp-cut-short', case_id: caseId, iss: 75, imported_at: Date.now(), imported_by: null });
    expect(await abandonStagedImports(server.db, Date.now())).toEqual(['imp-cut-short']);
    expect(await staged()).toBe(0);
    expect(await server.db('outcomes').where({ case_id: caseId }).first()).toEqual(outcome);
    const row = await server.db('audit_log').where({ action: 'outcome.batch-abandoned', entity_id: 'imp-cut-short' }).first();
    expect(JSON.parse(row.after)).toEqual({ batch: 'imp-cut-short', staged: 1, reason: 'the server stopped before the import was saved' });
  });
});
