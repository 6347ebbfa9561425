import { execFile } from 'node:child_process';
import { randomUUID } from 'node:crypto';
import { promisify } from 'node:util';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { appendAudit, appendAudits, systemActor, verifyAuditChain } from '../../server/services/audit/audit';
import type { Mailer } from '../../server/mail';
import { databaseEnv, onPostgres } from '../support/database';
import { startTestServer, type TestServer } from '../support/server';
import { signIn, type SignedInClient } from '../support/sign-in';
import { command, connectAs, type TestSocket } from '../support/socket';

// The audit trail: the database refuses to change or remove a row, every step on a case is one
// row, and a row changed behind the application's back breaks the hash chain where it was changed.

const run = promisify(execFile);
const quietMailer: Mailer = { local: false, send: async () => ({ messageId: 'test' }), close: async () => {} };
// 34-year-old, SBP 84 < 90 (2021 guideline, Newgard 2022 [source]): full under the example policy.
const FULL = { ageYears: 34, sex: 'male', fall: { heightM: 4 }, vitals: { sbp: 84, hr: 120 } };

let server: TestServer;
let nurse: SignedInClient;
let crew: TestSocket;
let general: number;
let fenmoor: number;

beforeAll(async () => {
  server = await startTestServer({}, { mailer: quietMailer });
  general = (await server.db('hospitals').where({ short_name: 'Alderwick General' }).first('id')).id;
  fenmoor = (await server.db('hospitals').where({ short_name: 'Fenmoor Community' }).first('id')).id;
  nurse = await signIn(server.url, 'nurse@plumbline.test');
  crew = await connectAs(server.url, await signIn(server.url, 'paramedic@plumbline.test'));
}, 30_000);

afterAll(async () => {
  crew?.close();
  await server?.close();
});

const caseRows = (caseId: number) => server.db('audit_log').where({ case_id: caseId }).orderBy('id');
const eventCount = async (caseId: number) => Number((await server.db('case_events').where({ case_id: caseId }).count({ n: '*' }).first())?.n);

async function submit(): Promise<number> {
  const answer = await command<{ caseId: number }>(crew, 'case:submit', { clientId: randomUUID(), hospitalId: general, etaMinutes: 10, clinical: FULL });
  if (!answer.ok) throw new Error(answer.error.message);
  return answer.data.caseId;
}

const rowVersionOf = async (caseId: number) => (await server.db('cases').where({ id: caseId }).first('row_version')).row_version as number;

describe('the database keeps the audit trail append-only', () => {
  it('refuses UPDATE of an audit row', async () => {
    const row = await server.db('audit_log').orderBy('id').first();
    await expect(server.db('audit_log').where({ id: row.id }).update({ action: 'case.nothing-happened' })).rejects.toThrow(/audit_log is append-only/);
    expect((await server.db('audit_log').where({ id: row.id }).first()).action).toBe(row.action);
  });

  it('refuses DELETE of an audit row, and of all of them', async () => {
    const before = await server.db('audit_log').count({ n: '*' }).first();
    await expect(server.db('audit_log').where('id', '>', 0).del()).rejects.toThrow(/audit_log is append-only/);
    expect(await server.db('audit_log').count({ n: '*' }).first()).toEqual(before);
  });
});

describe('every step on a case is exactly one audit row', () => {
  it('writes one row per board action, naming the nurse’s role and the case’s policy version', async () => {
    const caseId = await submit();
    const steps: Array<[string, Record<string, unknown>, string]> = [
      ['acknowledge', {}, 'case.acknowledged'],
      ['decide', { level: 'limited', reason: 'Vitals improved on the second set' }, 'case.level-decided'],
      // A bay the demo's cases leave free: assigning an occupied one asks again (409) first.
      ['bay', { bay: 'Majors 2' }, 'case.bay-assigned'],
      ['page', {}, 'case.paged'],
      ['arrived', {}, 'case.arrived'],
      ['team-at-bedside', {}, 'case.team-at-bedside'],
      ['close', {}, 'case.closed'],
    ];
    for (const [action, body, expected] of steps) {
      const before = (await caseRows(caseId)).length;
      const events = await eventCount(caseId);
      const res = await nurse.send('POST', `/api/cases/${caseId}/${action}`, { rowVersion: await rowVersionOf(caseId), ...body });
      expect(res.status, `${action}: ${await res.clone().text()}`).toBe(200);
      const rows = await caseRows(caseId);
      expect(rows.length, action).toBe(before + 1);
      expect(await eventCount(caseId), action).toBe(events + 1);
      expect([rows.at(-1).action, rows.at(-1).actor_role, rows.at(-1).entity, rows.at(-1).policy_id, rows.at(-1).policy_version]).toEqual([expected, 'charge_nurse', 'case', 'example-tiered', 1]);
    }
    const decided = (await caseRows(caseId)).find((r) => r.action === 'case.level-decided');
    expect(JSON.parse(decided.before)).toEqual({ level: null, reason: null });
    expect(JSON.parse(decided.after)).toMatchObject({ level: 'limited', recommended: 'full', below: true, reason: 'Vitals improved on the second set' });
  });

  it('writes no row for a refused action: a stale version (409) or a missing reason (400)', async () => {
    const caseId = await submit();
    const stale = await rowVersionOf(caseId);
    expect((await nurse.send('POST', `/api/cases/${caseId}/acknowledge`, { rowVersion: stale })).status).toBe(200);
    const before = (await caseRows(caseId)).length;
    expect((await nurse.send('POST', `/api/cases/${caseId}/bay`, { rowVersion: stale, bay: 'Resus 1' })).status).toBe(409);
    expect((await nurse.send('POST', `/api/cases/${caseId}/decide`, { rowVersion: await rowVersionOf(caseId), level: 'none' })).status).toBe(400);
    expect((await caseRows(caseId)).length).toBe(before);
  });

  it('writes one row for each crew step: received, revised, redirected, cancelled', async () => {
    const caseId = await submit();
    expect((await caseRows(caseId)).map((r) => [r.action, r.actor_role])).toEqual([['case.received', 'paramedic']]);
    const revise = await command(crew, 'case:update', { caseId, etaMinutes: 6, clinical: { ...FULL, vitals: { sbp: 80, hr: 130 } } });
    expect(revise.ok).toBe(true);
    const redirect = await command(crew, 'case:redirect', { caseId, hospitalId: fenmoor, reason: 'Bridge closed, nearer ED' });
    expect(redirect.ok).toBe(true);
    const cancel = await command(crew, 'case:cancel', { caseId, reason: 'Patient refused transport' });
    expect(cancel.ok).toBe(true);
    const rows = await caseRows(caseId);
    expect(rows.map((r) => [r.action, r.actor_role])).toEqual([
      ['case.received', 'paramedic'], ['case.revised', 'paramedic'], ['case.redirected', 'paramedic'], ['case.cancelled', 'paramedic'],
    ]);
    expect(JSON.parse(rows[2].before)).toMatchObject({ hospitalId: general });
    expect(await eventCount(caseId)).toBe(4);
  });
});

// The append-only guard is one trigger for both on PostgreSQL, one for each on SQLite.
const dropAuditGuard = (kind: 'update' | 'delete') =>
  server.db.raw(onPostgres ? 'DROP TRIGGER IF EXISTS audit_log_no_change ON audit_log' : `DROP TRIGGER audit_log_no_${kind}`);

describe('plumbline audit verify', () => {
  const verify = async () => {
    try {
      const { stdout } = await run(process.execPath, ['server/cli/bin.mjs', 'audit', 'verify'], { env: { ...process.env, DATA_DIR: server.dataDir, NODE_ENV: 'test', ...databaseEnv(server.config) } });
      return { code: 0, stdout };
    } catch (err) {
      const e = err as { code: number; stdout: string };
      return { code: e.code, stdout: e.stdout };
    }
  };

  it('walks a chain longer than one batch of rows, and two checks at once share one walk', async () => {
    // Enough rows that the walk reads several batches and carries the link across each boundary.
    for (let i = 0; i < 2100; i++) await appendAudit(server.db, { at: Date.now(), actor: systemActor, action: 'setting.changed', entity: 'setting', entityId: `bulk-${i}`, after: { i } });
    const count = Number((await server.db('audit_log').count({ n: '*' }).first())?.n);
    expect(count).toBeGreaterThan(2100);
    const first = verifyAuditChain(server.db);
    expect(verifyAuditChain(server.db)).toBe(first);
    expect(await first).toEqual({ ok: true, rows: count, keyedFrom: 1 });
    // Once done, the next check walks again rather than answering from the last one.
    const again = verifyAuditChain(server.db);
    expect(again).not.toBe(first);
    expect(await again).toEqual({ ok: true, rows: count, keyedFrom: 1 });
  }, 60_000);

  it('appends many rows at once in the given order, linked one to the next, or none when the transaction fails', async () => {
    // More rows than one insert carries, so the link crosses the insert boundary too.
    const entries = Array.from({ length: 1200 }, (_, i) => ({ at: Date.now(), actor: systemActor, action: 'setting.changed', entity: 'setting' as const, entityId: `many-${i}`, after: { i } }));
    const head = await server.db('audit_log').orderBy('id', 'desc').first('id', 'hash');
    const ids = await server.db.transaction((trx) => appendAudits(trx, entries));
    expect(ids).toHaveLength(1200);
    const rows = await server.db('audit_log').where('id', '>', head.id).orderBy('id').select('id', 'entity_id', 'prev_hash', 'hash');
    expect(rows.map((r) => r.id)).toEqual(ids);
    expect(rows.map((r) => r.entity_id)).toEqual(entries.map((e) => e.entityId));
    expect(rows[0].prev_hash).toBe(head.hash);
    rows.slice(1).forEach((row, i) => expect(row.prev_hash).toBe(rows[i].hash));
    expect((await verifyAuditChain(server.db)).ok).toBe(true);

    // A change that fails after its rows were appended leaves no trace of them, and the chain holds.
    const before = Number((await server.db('audit_log').count({ n: '*' }).first())?.n);
    await expect(server.db.transaction(async (trx) => {
      await appendAudits(trx, entries.slice(0, 10));
      throw new Error('the change failed');
    })).rejects.toThrow('the change failed');
    expect(Number((await server.db('audit_log').count({ n: '*' }).first())?.n)).toBe(before);
    expect((await verifyAuditChain(server.db)).ok).toBe(true);
  }, 60_000);

  it('finds a row changed behind the application’s back, names it, and says so on the review API', async () => {
    const count = Number((await server.db('audit_log').count({ n: '*' }).first())?.n);
    const intact = await verify();
    expect(intact).toEqual({ code: 0, stdout: `Audit trail OK: ${count} row(s) checked, the hash chain holds (keyed from the first row).\n` });

    // Someone with the database file softens a decision on the record: drop the guard, edit the row.
    const target = await server.db('audit_log').where({ action: 'case.level-decided' }).orderBy('id').first();
    const position = Number((await server.db('audit_log').where('id', '<=', target.id).count({ n: '*' }).first())?.n);
    await dropAuditGuard('update');
    await server.db('audit_log').where({ id: target.id }).update({ after: target.after.replace('"limited"', '"full"') });

    expect(await verifyAuditChain(server.db)).toEqual({ ok: false, rows: position, brokenAt: target.id, reason: 'its content does not match its hash (the row was changed)' });
    const broken = await verify();
    expect(broken).toEqual({ code: 1, stdout: `Audit trail BROKEN at row ${target.id}: its content does not match its hash (the row was changed). ${position - 1} row(s) before it hold.\n` });
    const lead = await signIn(server.url, 'lead@plumbline.test');
    expect(await (await lead.get('/api/review/audit-chain')).json()).toMatchObject({ ok: false, brokenAt: target.id });

    // Putting the text back restores the chain, which shows the hash covers the content itself.
    await server.db('audit_log').where({ id: target.id }).update({ after: target.after });
    expect(await verifyAuditChain(server.db)).toEqual({ ok: true, rows: count, keyedFrom: 1 });
  }, 30_000);

  it('finds a row removed behind the application’s back by the next row’s broken link', async () => {
    const victim = await server.db('audit_log').where({ action: 'case.paged' }).orderBy('id').first();
    const afterVictim = await server.db('audit_log').where('id', '>', victim.id).orderBy('id').first();
    await dropAuditGuard('delete');
    await server.db('audit_log').where({ id: victim.id }).del();
    const check = await verifyAuditChain(server.db);
    expect(check).toMatchObject({ ok: false, brokenAt: afterVictim.id, reason: 'its link to the previous row does not match (a row was removed or inserted)' });
  });

  it('refuses a wrong sub-command with its usage (exit 2)', async () => {
    const { auditCommand } = await import('../../server/cli/audit-command');
    const out: string[] = [];
    const sink = { write: (s: string) => (out.push(s), true) } as unknown as NodeJS.WritableStream;
    expect(await auditCommand(['repair'], { stdout: sink, stderr: sink }, { db: server.db })).toBe(2);
    expect(out.join('')).toMatch(/^usage: plumbline audit verify \[--checkpoints FILE\]/);
  });
});
