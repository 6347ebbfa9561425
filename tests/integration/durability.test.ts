// An acknowledged pre-alert is a promise to the crew: it is committed before the acknowledgement
// leaves the server, so killing the server process with SIGKILL right after it loses nothing.
import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { io as connect, type Socket } from 'socket.io-client';
import type { CaseSummary } from '../../shared/schemas/cases';
import type { AckResponse } from '../../shared/realtime/events';
import { createDb } from '../../server/db';
import { verifyAuditChain } from '../../server/services/audit/audit';
import { signIn } from '../support/sign-in';
import { childServer, databaseFileOf, type ChildServer } from '../bench/support/child-server';
import { createTestDatabase, onPostgres, type TestDatabase } from '../support/database';

let server: ChildServer;
// In the PostgreSQL pass the child process runs on a database of its own there.
let database: TestDatabase | null = null;
beforeAll(async () => {
  database = onPostgres ? await createTestDatabase() : null;
  // Fifty commands from one crew account at once, more than its minute's limit: this file is
  // about what an acknowledgement promises, so the account may send them all (flood.test.ts
  // holds the limit itself).
  // The child starts beside the other projects' files and a browser on the same cores (in CI,
  // two); its first start once took over the default 60 s there, so it is given 120 s.
  server = await childServer({ env: { CREW_COMMANDS_PER_MINUTE: '1000', ...(database ? { DATABASE_URL: database.url } : {}) }, startTimeoutMs: 120_000 });
  await server.start();
}, 150_000);
afterAll(async () => {
  await server?.dispose();
  await database?.drop();
});

type Submitted = AckResponse<{ caseId: number; caseNumber: string; created: boolean; summary: CaseSummary }>;

describe('kill -9 of the server straight after the acknowledgements', () => {
  it('keeps every acknowledged pre-alert and update, with its revision and audit rows, and lists them after the restart', async () => {
    const medic = await signIn(server.url, 'paramedic@plumbline.test');
    const nurse = await signIn(server.url, 'nurse@plumbline.test');
    const me = await (await nurse.get('/api/me')).json();
    const hospitalId = me.memberships.find((m: { kind: string }) => m.kind === 'hospital').id as number;
    const crew: Socket = connect(server.url, { transports: ['websocket'], forceNew: true, reconnection: false, extraHeaders: { cookie: await medic.cookieHeader() } });
    await new Promise<void>((resolve, reject) => {
      crew.once('connect', () => resolve());
      crew.once('connect_error', reject);
    });

    // 40 pre-alerts in flight at once, then an update on the first ten: 50 acknowledgements.
    const count = 40;
    const clientIds = Array.from({ length: count }, () => randomUUID());
    const acked: Array<{ clientId: string; caseId: number; caseNumber: string }> = [];
    await Promise.all(
      clientIds.map(
        (clientId, i) =>
          new Promise<void>((resolve, reject) => {
            crew.timeout(10_000).emit(
              'case:submit',
              // 2021 guideline (Newgard 2022) [source]: a fall over 10 ft (3.048 m) is a moderate-risk mechanism.
              { clientId, hospitalId, etaMinutes: 10 + (i % 20), clinical: { ageYears: 30 + i, sex: 'female', fall: { heightM: 4 }, vitals: { sbp: 128, hr: 88, gcsTotal: 15 } } },
              (err: Error | null, answer: Submitted) => {
                if (err) return reject(err);
                if (!answer.ok) return reject(new Error(answer.error.message));
                acked.push({ clientId, caseId: answer.data.caseId, caseNumber: answer.data.caseNumber });
                resolve();
              },
            );
          }),
      ),
    );
    expect(acked).toHaveLength(count);
    const updated = acked.slice(0, 10);
    const pid = server.pid!;
    let killedAfter = 0;
    await new Promise<void>((resolve, reject) => {
      let left = updated.length;
      for (const one of updated) {
        crew.timeout(10_000).emit(
          'case:update',
          // 2021 guideline [source]: SBP < 90 at age 10–64 is high risk.
          { caseId: one.caseId, etaMinutes: 4, clinical: { ageYears: 30, sex: 'female', fall: { heightM: 4 }, vitals: { sbp: 84, hr: 124, gcsTotal: 14 } } },
          (err: Error | null, answer: AckResponse<{ summary: CaseSummary }>) => {
            if (err) return reject(err);
            if (!answer.ok) return reject(new Error(answer.error.message));
            if (--left === 0) {
              // In the acknowledgement's own callback: no later tick for the server to catch up in.
              process.kill(pid, 'SIGKILL');
              killedAfter = acked.length + updated.length;
              resolve();
            }
          },
        );
      }
    });
    crew.close();
    await server.stop('SIGKILL');
    expect(killedAfter).toBe(50);

    // The database as the killed process left it, opened directly.
    const db = database ? createDb(database.url, { keyDir: server.dataDir }) : createDb(databaseFileOf(server.dataDir));
    try {
      const rows = await db('cases').whereIn('client_id', clientIds).select('id', 'client_id', 'case_number', 'current_revision', 'state');
      expect(rows).toHaveLength(count);
      const byClient = new Map(rows.map((r) => [r.client_id as string, r]));
      for (const one of acked) {
        const row = byClient.get(one.clientId)!;
        expect(row.case_number).toBe(one.caseNumber);
        expect(row.state).toBe('en-route');
        expect(row.current_revision).toBe(updated.includes(one) ? 2 : 1);
      }
      const ids = acked.map((a) => a.caseId);
      const revisions = await db('case_revisions').whereIn('case_id', ids).select('case_id', 'revision', 'activation');
      expect(revisions).toHaveLength(count + updated.length);
      // The example policy [ours, SOURCES.md §6]: SBP < 90 at age ≥ 10 calls a full activation.
      expect(revisions.filter((r) => r.revision === 2).every((r) => r.activation === 'full')).toBe(true);
      const events = await db('case_events').whereIn('case_id', ids).select('case_id', 'kind');
      expect(events.filter((e) => e.kind === 'received')).toHaveLength(count);
      expect(events.filter((e) => e.kind === 'revised')).toHaveLength(updated.length);
      const audit = await db('audit_log').whereIn('case_id', ids).select('case_id', 'action');
      expect(audit.filter((a) => a.action === 'case.received')).toHaveLength(count);
      expect(audit.filter((a) => a.action === 'case.revised')).toHaveLength(updated.length);
      expect((await verifyAuditChain(db)).ok).toBe(true);
    } finally {
      await db.destroy();
    }

    // Started again on the same file: the board's snapshot lists every one, with the session intact.
    await server.start();
    const res = await nurse.get('/api/cases');
    expect(res.status).toBe(200);
    const { cases } = (await res.json()) as { cases: CaseSummary[] };
    const listed = new Map(cases.map((c) => [c.clientId, c]));
    for (const one of acked) {
      expect(listed.get(one.clientId)?.caseNumber).toBe(one.caseNumber);
      expect(listed.get(one.clientId)?.revision).toBe(updated.includes(one) ? 2 : 1);
    }
  }, 120_000);
});
