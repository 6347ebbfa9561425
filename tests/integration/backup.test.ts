// An online backup taken while crews keep sending pre-alerts is whole and consistent, and a
// restore refuses to pull the database out from under a running server.
import { randomUUID } from 'node:crypto';
import { existsSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { Writable } from 'node:stream';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { io as connect, type Socket } from 'socket.io-client';
import type { CaseSummary } from '../../shared/schemas/cases';
import type { AckResponse } from '../../shared/realtime/events';
import { createDb } from '../../server/db';
import { verifyAuditChain } from '../../server/services/audit/audit';
import { loadAuditKey } from '../../server/audit-key';
import { backupCommand, restoreCommand } from '../../server/cli/backup-command';
import { itOnSqlite, onPostgres } from '../support/database';
import { signIn } from '../support/sign-in';
import { childServer, databaseFileOf, tempDataDir, type ChildServer } from '../bench/support/child-server';

function capture() {
  let text = '';
  const stream = new Writable({
    write(chunk, _enc, done) {
      text += String(chunk);
      done();
    },
  });
  return { stream, text: () => text };
}

function runCli(command: typeof backupCommand, args: string[], databaseFile: string) {
  const stdout = capture();
  const stderr = capture();
  return command(args, { stdout: stdout.stream, stderr: stderr.stream } as never, { databaseFile }).then((code) => ({ code, out: stdout.text(), err: stderr.text() }));
}

let server: ChildServer;
let backups: string;
// SQLite's online backup of its file; on PostgreSQL the command refuses and points to pg_dump
// (tests/unit/server/cli/database-url.test.ts).
const onSqliteFile = itOnSqlite('it copies and restores the SQLite file');
beforeAll(async () => {
  if (onPostgres) return;
  // One crew account sends the whole stream: lift the per-account and per-unit flood limits.
  server = await childServer({ env: { CREW_COMMANDS_PER_MINUTE: '10000', UNIT_COMMANDS_PER_MINUTE: '10000' } });
  await server.start();
  backups = tempDataDir('plumbline-backups-');
}, 90_000);
afterAll(async () => {
  await server?.dispose();
  if (backups) rmSync(backups, { recursive: true, force: true });
});

describe('plumbline backup FILE while the server takes pre-alerts', () => {
  onSqliteFile('writes a copy that passes the integrity check, holds whole cases only, and keeps the audit chain', async () => {
    const medic = await signIn(server.url, 'paramedic@plumbline.test');
    const me = await (await (await signIn(server.url, 'nurse@plumbline.test')).get('/api/me')).json();
    const hospitalId = me.memberships[0].id as number;
    const crew: Socket = connect(server.url, { transports: ['websocket'], forceNew: true, reconnection: false, extraHeaders: { cookie: await medic.cookieHeader() } });
    await new Promise<void>((resolve, reject) => {
      crew.once('connect', () => resolve());
      crew.once('connect_error', reject);
    });
    const acked: string[] = [];
    let sending = true;
    const sender = (async () => {
      while (sending) {
        const clientId = randomUUID();
        const answer = await new Promise<AckResponse<{ summary: CaseSummary }>>((resolve) =>
          crew.emit('case:submit', { clientId, hospitalId, clinical: { ageYears: 81, sex: 'male', anticoagulant: true, fall: { heightM: 0, headImpact: true }, vitals: { sbp: 142, gcsTotal: 15 } } }, resolve),
        );
        if (answer.ok) acked.push(clientId);
      }
    })();
    while (acked.length < 15) await new Promise((r) => setTimeout(r, 20));
    const before = acked.length;
    const file = join(backups, 'during-writes.sqlite');
    const result = await runCli(backupCommand, [file], databaseFileOf(server.dataDir));
    const after = acked.length;
    while (acked.length < after + 10) await new Promise((r) => setTimeout(r, 20));
    sending = false;
    await sender;
    crew.close();

    expect(result.err).toBe('');
    expect(result.code).toBe(0);
    expect(result.out).toMatch(/^Backed up to .*during-writes\.sqlite in \d+ ms: integrity ok, \d+ case\(s\), \d+ audit row\(s\)\.\n$/);
    // No half-written file is left beside it.
    expect(readdirSync(backups)).toEqual(['during-writes.sqlite']);

    // The copy lies in another folder; it verifies with the server's audit key, kept apart from backups.
    const copy = createDb(file, { auditKey: loadAuditKey(server.dataDir) });
    try {
      expect((await copy.raw('PRAGMA integrity_check'))[0].integrity_check).toBe('ok');
      const ours = await copy('cases').whereIn('client_id', acked).select('id', 'client_id', 'current_revision');
      const inCopy = new Set(ours.map((r) => r.client_id as string));
      // Everything acknowledged before the backup began is in it; nothing sent after it ended is.
      for (const id of acked.slice(0, before)) expect(inCopy.has(id)).toBe(true);
      for (const id of acked.slice(after + 1)) expect(inCopy.has(id)).toBe(false);
      // One moment, not a mixture: every case in the copy has its revision, its event and its audit row.
      const ids = ours.map((r) => r.id as number);
      expect(await copy('case_revisions').whereIn('case_id', ids).count({ n: '*' }).first()).toEqual({ n: ids.length });
      expect(await copy('case_events').whereIn('case_id', ids).where({ kind: 'received' }).count({ n: '*' }).first()).toEqual({ n: ids.length });
      expect(await copy('audit_log').whereIn('case_id', ids).where({ action: 'case.received' }).count({ n: '*' }).first()).toEqual({ n: ids.length });
      expect((await verifyAuditChain(copy)).ok).toBe(true);
    } finally {
      await copy.destroy();
    }
  }, 60_000);

  onSqliteFile('never overwrites an existing file', async () => {
    const file = join(backups, 'taken.sqlite');
    writeFileSync(file, 'something precious');
    const result = await runCli(backupCommand, [file], databaseFileOf(server.dataDir));
    expect(result.code).toBe(1);
    expect(result.err).toBe(`${file} already exists; a backup never overwrites a file. Choose a new name.\n`);
  });

  onSqliteFile('answers a missing file name with the usage', async () => {
    const result = await runCli(backupCommand, [], databaseFileOf(server.dataDir));
    expect(result.code).toBe(2);
    expect(result.err).toMatch(/^usage: plumbline backup FILE/);
  });
});

describe('plumbline restore FILE', () => {
  onSqliteFile('refuses while the server has the database open, and changes nothing', async () => {
    const file = join(backups, 'during-writes.sqlite');
    const result = await runCli(restoreCommand, [file], databaseFileOf(server.dataDir));
    expect(result.code).toBe(1);
    expect(result.err).toMatch(/^A Plumbline server \(or another program\) has this database open\. Stop it first/);
    expect(readdirSync(server.dataDir).filter((f) => f.includes('before-restore'))).toEqual([]);
    expect((await fetch(`${server.url}/api/health`)).status).toBe(200);
  });

  onSqliteFile('refuses a file that is not a Plumbline database', async () => {
    const file = join(backups, 'taken.sqlite');
    const result = await runCli(restoreCommand, [file], databaseFileOf(server.dataDir));
    expect(result.code).toBe(1);
    expect(result.err).toBe(`${file} cannot be restored: file is not a database. Nothing was changed.\n`);
  });

  onSqliteFile('puts the backup back once the server is stopped, keeps the replaced file, and the server starts on it', async () => {
    const file = join(backups, 'during-writes.sqlite');
    const medic = await signIn(server.url, 'paramedic@plumbline.test');
    const crew: Socket = connect(server.url, { transports: ['websocket'], forceNew: true, reconnection: false, extraHeaders: { cookie: await medic.cookieHeader() } });
    await new Promise<void>((resolve) => crew.once('connect', () => resolve()));
    // A pre-alert made after the backup: the restore takes the database back to before it.
    const later = randomUUID();
    const answer = await new Promise<AckResponse<unknown>>((resolve) =>
      crew.emit('case:submit', { clientId: later, hospitalId: 1, clinical: { ageYears: 45, fall: { heightM: 2 }, vitals: { sbp: 130 } } }, resolve),
    );
    crew.close();
    expect(answer.ok).toBe(true);
    await server.stop('SIGTERM');

    const result = await runCli(restoreCommand, [file], databaseFileOf(server.dataDir));
    expect(result.err).toBe('');
    expect(result.code).toBe(0);
    expect(result.out).toMatch(/^Restored .*during-writes\.sqlite: \d+ case\(s\), \d+ audit row\(s\)\. The previous database is kept as .*plumbline\.sqlite\.before-restore-\S+\. Start the server/);
    const kept = readdirSync(server.dataDir).filter((f) => f.startsWith('plumbline.sqlite.before-restore-'));
    expect(kept).toHaveLength(1);

    await server.start();
    const nurse = await signIn(server.url, 'nurse@plumbline.test');
    const { cases } = (await (await nurse.get('/api/cases')).json()) as { cases: CaseSummary[] };
    expect(cases.length).toBeGreaterThan(15);
    expect(cases.some((c) => c.clientId === later)).toBe(false);
    const keptDb = createDb(join(server.dataDir, kept[0]));
    try {
      expect(await keptDb('cases').where({ client_id: later }).count({ n: '*' }).first()).toEqual({ n: 1 });
    } finally {
      await keptDb.destroy();
    }
    expect(existsSync(databaseFileOf(server.dataDir))).toBe(true);
  }, 90_000);
});
