import { execFile } from 'node:child_process';
import { randomUUID } from 'node:crypto';
import { copyFileSync, existsSync, mkdtempSync, readFileSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { promisify } from 'node:util';
import type { Knex } from 'knex';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { AUDIT_KEY_FILE, loadAuditKey } from '../../server/audit-key';
import { createDb, migrate } from '../../server/db';
import { appendAudit, GENESIS_HASH, rowHash, startKeyedChain, systemActor, verifyAuditChain } from '../../server/services/audit/audit';
import { periodStart } from '../../server/services/jobs/claims';
import { CHECKPOINT_FILE, CHECKPOINT_JOB, checkCheckpoints, checkpointJob, PROGRAMME_EMAIL_SETTING, writeCheckpoint } from '../../server/services/audit/checkpoints';
import { setSetting } from '../../server/services/people/settings';
import { databaseEnv, itOnSqlite } from '../support/database';
import { startTestServer, type TestServer } from '../support/server';
import { createForeignRegion, FOREIGN_PASSWORD } from '../support/foreign-region';
import { signIn } from '../support/sign-in';
import { command, connectAs, type TestSocket } from '../support/socket';

// Tamper evidence beyond the database file: the chain is keyed with a key kept outside it, and
// signed checkpoints of its head leave the machine. Each tamper below works on a COPY of the
// data directory (database and key), as someone who took the files would. Those work on the
// SQLite file, so the PostgreSQL pass leaves them out; the rest runs on both.

const run = promisify(execFile);
const onCopyOfFile = itOnSqlite('it tampers with a copy of the database file');
const PROGRAMME = 'trauma-programme@alderwick-general.plumbline.test';
// 34-year-old, SBP 84 < 90 (2021 guideline, Newgard 2022 [source]): full under the example policy.
const FULL = { ageYears: 34, sex: 'male', fall: { heightM: 4 }, vitals: { sbp: 84, hr: 120 } };

let server: TestServer;
let crew: TestSocket;
let general: number;
const dirs: string[] = [];

beforeAll(async () => {
  server = await startTestServer();
  general = (await server.db('hospitals').where({ short_name: 'Alderwick General' }).first('id')).id;
  // The demo sets it; set again here through the audited path, as an administrator would.
  await setSetting(server.db, PROGRAMME_EMAIL_SETTING, PROGRAMME, general, { actor: systemActor, at: Date.now() });
  crew = await connectAs(server.url, await signIn(server.url, 'paramedic@plumbline.test'));
}, 30_000);

afterAll(async () => {
  crew?.close();
  await server?.close();
  for (const dir of dirs) rmSync(dir, { recursive: true, force: true });
});

async function submit(): Promise<number> {
  const answer = await command<{ caseId: number }>(crew, 'case:submit', { clientId: randomUUID(), hospitalId: general, etaMinutes: 10, clinical: FULL });
  if (!answer.ok) throw new Error(answer.error.message);
  return answer.data.caseId;
}

async function cli(dataDir: string, ...args: string[]): Promise<{ code: number; stdout: string; stderr: string }> {
  try {
    const { stdout, stderr } = await run(process.execPath, ['server/cli/bin.mjs', 'audit', ...args], { env: { ...process.env, DATA_DIR: dataDir, NODE_ENV: 'test', SMTP_URL: '', AUDIT_KEY: '', ...(dataDir === server.dataDir ? databaseEnv(server.config) : {}) } });
    return { code: 0, stdout, stderr };
  } catch (err) {
    const e = err as { code: number; stdout: string; stderr: string };
    return { code: e.code, stdout: e.stdout, stderr: e.stderr };
  }
}

/** A copy of the whole data directory (database, key, checkpoints), taken while the server runs. */
async function copyOfDataDir(): Promise<string> {
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-tamper-'));
  dirs.push(dir);
  await server.db.raw('VACUUM INTO ?', [join(dir, 'plumbline.sqlite')]);
  copyFileSync(join(server.dataDir, AUDIT_KEY_FILE), join(dir, AUDIT_KEY_FILE));
  return dir;
}

async function withDb<T>(dir: string, work: (db: Knex) => Promise<T>): Promise<T> {
  const db = createDb(join(dir, 'plumbline.sqlite'));
  try {
    return await work(db);
  } finally {
    await db.destroy();
  }
}

describe('the audit key', () => {
  it('lives outside the database, in a key file only its owner can read', () => {
    const mode = statSync(join(server.dataDir, AUDIT_KEY_FILE)).mode & 0o777;
    expect(mode.toString(8)).toBe('600');
  });

  it('comes from AUDIT_KEY when set, and a short one is refused', () => {
    const dir = mkdtempSync(join(tmpdir(), 'plumbline-key-'));
    dirs.push(dir);
    expect(loadAuditKey(dir, { AUDIT_KEY: 'k'.repeat(40) }).toString()).toBe('k'.repeat(40));
    expect(existsSync(join(dir, AUDIT_KEY_FILE))).toBe(false);
    expect(() => loadAuditKey(dir, { AUDIT_KEY: 'short' })).toThrow(/AUDIT_KEY must be at least 32 characters/);
  });

  it('a key file others can read is made owner-only again', () => {
    const dir = mkdtempSync(join(tmpdir(), 'plumbline-key-'));
    dirs.push(dir);
    writeFileSync(join(dir, AUDIT_KEY_FILE), 'x'.repeat(43), { mode: 0o644 });
    loadAuditKey(dir, {});
    expect((statSync(join(dir, AUDIT_KEY_FILE)).mode & 0o777).toString(8)).toBe('600');
  });

  onCopyOfFile('a row rewritten without the key breaks the chain, though its plain SHA-256 is right', async () => {
    await submit();
    const dir = await copyOfDataDir();
    const row = await withDb(dir, async (db) => {
      const target = await db('audit_log').where({ action: 'case.received' }).orderBy('id', 'desc').first();
      // The old, unkeyed hash: what someone without the key could compute.
      const after = target.after.replace('"heightM":4', '"heightM":1');
      await db.raw('DROP TRIGGER audit_log_no_update');
      await db('audit_log').where({ id: target.id }).update({ after, hash: rowHash({ ...target, after }, null) });
      return target;
    });
    const out = await cli(dir, 'verify');
    expect(out.code).toBe(1);
    expect(out.stdout).toMatch(new RegExp(`^Audit trail BROKEN at row ${row.id}: its content does not match its hash`));
  });

  onCopyOfFile('a chain checked with another key says so', async () => {
    const dir = await copyOfDataDir();
    writeFileSync(join(dir, AUDIT_KEY_FILE), 'another-key-'.repeat(4), { mode: 0o600 });
    const out = await cli(dir, 'verify');
    expect(out.code).toBe(1);
    expect(out.stdout).toMatch(/^Audit trail BROKEN at row 1: the chain was keyed with another audit key/);
  });
});

describe('signed checkpoints', () => {
  it('`plumbline audit checkpoint` appends a signed line to the file and mails it to the trauma programme', async () => {
    await submit();
    const file = join(server.dataDir, CHECKPOINT_FILE);
    const before = existsSync(file) ? readFileSync(file, 'utf8').split('\n').filter(Boolean).length : 0;
    const head = await server.db('audit_log').orderBy('id', 'desc').first('id', 'hash');
    const out = await cli(server.dataDir, 'checkpoint');
    expect(out.stderr).toBe('');
    expect(out.stdout).toBe(`Checkpoint of row ${head.id} appended to ${file} and mailed to ${PROGRAMME}.\n`);
    const lines = readFileSync(file, 'utf8').split('\n').filter(Boolean);
    expect(lines.length).toBe(before + 1);
    const written = JSON.parse(lines.at(-1)!);
    expect(written).toMatchObject({ v: 1, headId: head.id, headHash: head.hash, keyedFrom: 1 });
    expect(written.sig).toMatch(/^[0-9a-f]{64}$/);
    expect((statSync(file).mode & 0o777).toString(8)).toBe('600');
    // Through the built-in SMTP server, as any mail goes.
    const mail = await server.db('mail_messages').where('subject', 'like', `Plumbline audit checkpoint: row ${head.id} %`).first();
    expect(JSON.parse(mail.recipients)).toEqual([PROGRAMME]);
    expect(mail.text).toContain(lines.at(-1));
  }, 30_000);

  it('the hourly job writes one too, and its stop waits for the one under way', async () => {
    const file = join(mkdtempSync(join(tmpdir(), 'plumbline-cp-')), CHECKPOINT_FILE);
    dirs.push(join(file, '..'));
    const job = checkpointJob({ db: server.db, clock: { now: () => Date.now() }, mailer: server.mailer, logger: server.logger, file }, 50);
    while (!existsSync(file)) await new Promise((r) => setTimeout(r, 20));
    await job.stop();
    const count = readFileSync(file, 'utf8').split('\n').filter(Boolean).length;
    await new Promise((r) => setTimeout(r, 200));
    expect(readFileSync(file, 'utf8').split('\n').filter(Boolean).length).toBe(count);
    expect((await checkCheckpoints(server.db, readFileSync(file, 'utf8'))).problems).toEqual([]);
  });

  it('with two processes running the hourly job, each period is written and mailed by one of them', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'plumbline-cp-'));
    dirs.push(dir);
    const files = [join(dir, 'first.jsonl'), join(dir, 'second.jsonl')];
    const everyMs = 300;
    const started = Date.now();
    // Two jobs with the same period, as two processes of a region run it.
    const jobs = files.map((file) => checkpointJob({ db: server.db, clock: { now: () => Date.now() }, mailer: server.mailer, logger: server.logger, file }, everyMs));
    await new Promise((r) => setTimeout(r, 4 * everyMs + 150));
    await Promise.all(jobs.map((job) => job.stop()));
    const written = files.flatMap((file) => (existsSync(file) ? readFileSync(file, 'utf8').split('\n').filter(Boolean).map((line) => JSON.parse(line).at as number) : []));
    expect(written.length).toBeGreaterThanOrEqual(3);
    // One checkpoint for each period claimed, by whichever process claimed it. (Its time may fall
    // in the next period on a busy machine, where a claim can wait longer than these 300 ms.)
    const claims = await server.db('job_claims').where({ job: CHECKPOINT_JOB }).where('claimed_at', '>=', started).select('period_start');
    expect(written.length).toBe(claims.length);
    for (const c of claims) expect(Number(c.period_start)).toBe(periodStart(Number(c.period_start), everyMs));
  });

  onCopyOfFile('a copy whose tail was cut off still passes the chain check, and fails against the checkpoints', async () => {
    await submit();
    await writeCheckpoint({ db: server.db, clock: { now: () => Date.now() }, mailer: null, file: join(server.dataDir, CHECKPOINT_FILE) });
    const head = await server.db('audit_log').orderBy('id', 'desc').first('id');
    const dir = await copyOfDataDir();
    const checkpoints = join(dir, 'checkpoints-from-mail.jsonl');
    copyFileSync(join(server.dataDir, CHECKPOINT_FILE), checkpoints);
    expect((await cli(dir, 'verify', '--checkpoints', checkpoints)).code).toBe(0);

    // The last pre-alert's rows go: its case event, its audit rows, the case itself would follow.
    await withDb(dir, async (db) => {
      await db.raw('DROP TRIGGER audit_log_no_delete');
      await db('audit_log').where('id', '>', head.id - 3).del();
    });
    const plain = await cli(dir, 'verify');
    expect(plain.code).toBe(0);
    const against = await cli(dir, 'verify', '--checkpoints', checkpoints);
    expect(against.code).toBe(1);
    expect(against.stdout).toContain(`row ${head.id} existed at`);
    expect(against.stdout).toContain(`the chain now ends at row ${head.id - 3} (its tail was cut off)`);
    expect(against.stdout).toMatch(/Checkpoints FAIL: \d+ of \d+ checkpoint\(s\) do not match the database\.\n$/);
  }, 60_000);

  onCopyOfFile('a copy whose tail was rewritten with the key passes the chain check, and fails against the checkpoints', async () => {
    await submit();
    await writeCheckpoint({ db: server.db, clock: { now: () => Date.now() }, mailer: null, file: join(server.dataDir, CHECKPOINT_FILE) });
    const head = await server.db('audit_log').orderBy('id', 'desc').first('id');
    const dir = await copyOfDataDir();
    const checkpoints = join(dir, 'checkpoints-from-mail.jsonl');
    copyFileSync(join(server.dataDir, CHECKPOINT_FILE), checkpoints);

    // Someone with the file AND the key changes the newest rows and re-hashes the tail correctly.
    await withDb(dir, async (db) => {
      const key = loadAuditKey(dir, {});
      await db.raw('DROP TRIGGER audit_log_no_update');
      const tail = await db('audit_log').where('id', '>=', head.id - 2).orderBy('id');
      let prev = (await db('audit_log').where('id', '<', head.id - 2).orderBy('id', 'desc').first('hash'))?.hash ?? GENESIS_HASH;
      for (const row of tail) {
        const after = JSON.stringify({ ...(JSON.parse(row.after ?? 'null') ?? {}), note: 'entered later' });
        const hash = rowHash({ ...row, after, prev_hash: prev }, key);
        await db('audit_log').where({ id: row.id }).update({ after, prev_hash: prev, hash });
        prev = hash;
      }
      expect(await verifyAuditChain(db)).toMatchObject({ ok: true });
    });
    expect((await cli(dir, 'verify')).code).toBe(0);
    const against = await cli(dir, 'verify', '--checkpoints', checkpoints);
    expect(against.code).toBe(1);
    expect(against.stdout).toContain(`row ${head.id} had another hash at`);
    expect(against.stdout).toContain('(the chain was rewritten up to it)');
  }, 60_000);

  it('a checkpoint line changed to fit a shortened chain fails its signature', async () => {
    const file = join(server.dataDir, CHECKPOINT_FILE);
    const lines = readFileSync(file, 'utf8').split('\n').filter(Boolean);
    const last = JSON.parse(lines.at(-1)!);
    const forged = JSON.stringify({ ...last, headId: last.headId - 1 });
    const { checked, problems } = await checkCheckpoints(server.db, `${lines.join('\n')}\n${forged}\nnot json\n`);
    expect(checked).toBe(lines.length + 1);
    expect(problems).toEqual([
      { line: lines.length + 1, problem: 'its signature does not match this audit key (the line was changed, or made with another key)' },
      { line: lines.length + 2, problem: 'not a checkpoint (not JSON)' },
    ]);
  });
});

describe('the trauma programme address', () => {
  it('an administrator sets it for a hospital of theirs, audited; others may not; a bad address is refused naming the field', async () => {
    const admin = await signIn(server.url, 'admin@plumbline.test');
    const address = 'programme-office@alderwick-general.plumbline.test';
    const set = await admin.send('PUT', '/api/audit/programme-email', { hospitalId: general, email: address });
    expect(set.status, await set.clone().text()).toBe(200);
    expect(await (await admin.get(`/api/audit/programme-email?hospitalId=${general}`)).json()).toEqual({ hospitalId: general, email: address });
    const audit = await server.db('audit_log').where({ action: 'setting.changed', entity_id: `${general}:${PROGRAMME_EMAIL_SETTING}` }).orderBy('id', 'desc').first();
    expect(JSON.parse(audit.after)).toEqual({ key: PROGRAMME_EMAIL_SETTING, hospitalId: general, value: address });

    const bad = await admin.send('PUT', '/api/audit/programme-email', { hospitalId: general, email: 'not an address' });
    expect(bad.status).toBe(400);
    expect((await bad.json()).error).toMatchObject({ field: 'email' });
    const nurse = await signIn(server.url, 'nurse@plumbline.test');
    expect((await nurse.send('PUT', '/api/audit/programme-email', { hospitalId: general, email: 'x@plumbline.test' })).status).toBe(403);
    expect(await (await admin.get(`/api/audit/programme-email?hospitalId=${general}`)).json()).toEqual({ hospitalId: general, email: address });
    // Another county's administrator neither reads nor sets Alderwick's address.
    await createForeignRegion(server.db);
    const foreignAdmin = await signIn(server.url, 'admin@brackwater.test', FOREIGN_PASSWORD);
    expect((await foreignAdmin.get(`/api/audit/programme-email?hospitalId=${general}`)).status).toBe(403);
    expect((await foreignAdmin.send('PUT', '/api/audit/programme-email', { hospitalId: general, email: 'x@brackwater.test' })).status).toBe(403);
    // Put back for the checkpoint tests' mail.
    expect((await admin.send('PUT', '/api/audit/programme-email', { hospitalId: general, email: PROGRAMME })).status).toBe(200);
  }, 30_000);
});

describe('a database from before the chain had a key', () => {
  it('keeps its old rows as they are and starts the keyed chain at a recorded row; both parts are checked', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'plumbline-legacy-'));
    dirs.push(dir);
    await withDb(dir, async (db) => {
      await migrate(db);
      // Rows as the unkeyed product wrote them: plain SHA-256, no keyed start.
      let prev = GENESIS_HASH;
      for (let i = 0; i < 3; i++) {
        const row = { at: 1_700_000_000_000 + i, actor_id: null, actor_role: 'system', action: 'setting.changed', entity: 'setting', entity_id: `old-${i}`, case_id: null, before: null, after: JSON.stringify({ i }), policy_id: null, policy_version: null, prev_hash: prev };
        prev = rowHash(row, null);
        await db('audit_log').insert({ ...row, hash: prev });
      }
      await startKeyedChain(db, 1_800_000_000_000);
      await appendAudit(db, { at: 1_800_000_000_001, actor: systemActor, action: 'setting.changed', entity: 'setting', entityId: 'new', after: { i: 3 } });
      expect(await verifyAuditChain(db)).toEqual({ ok: true, rows: 5, keyedFrom: 4 });
      expect((await db('audit_log').where({ id: 4 }).first()).action).toBe('audit.keyed');
      // A second start adds nothing.
      await startKeyedChain(db, 1_800_000_000_002);
      expect(await db('audit_chain').count({ n: '*' }).first()).toEqual({ n: 1 });
    });
    const out = await cli(dir, 'verify');
    expect(out).toMatchObject({ code: 0, stdout: 'Audit trail OK: 5 row(s) checked, the hash chain holds (rows before 4 plain SHA-256, keyed from row 4).\n' });
    // An old row changed is still found by its SHA-256.
    await withDb(dir, async (db) => {
      await db.raw('DROP TRIGGER audit_log_no_update');
      await db('audit_log').where({ id: 2 }).update({ after: JSON.stringify({ i: 99 }) });
    });
    expect((await cli(dir, 'verify')).stdout).toMatch(/^Audit trail BROKEN at row 2: its content does not match its hash/);
  }, 30_000);
});
