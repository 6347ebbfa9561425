// Background jobs run in every process of a region. Two server processes on one SQLite file (WAL
// lets several processes on one machine share it) start together with 120 pre-alerts nobody
// has acknowledged for an hour: each case is marked overdue once, and each escalation step's
// notice goes out once, whichever process got there first.
import { randomUUID } from 'node:crypto';
import { afterAll, describe, expect, it } from 'vitest';
import { createDb, migrate } from '../../server/db';
import { loadMe } from '../../server/auth/guards';
import { seedDemo } from '../../server/services/demo/seed';
import { submitPreAlert } from '../../server/services/cases/commands';
import { systemClock } from '../../server/deps';
import { childServer, databaseFileOf, tempDataDir, type ChildServer } from '../bench/support/child-server';
import { onPostgres } from '../support/database';

const HOUR = 3_600_000;
// Enough that one process's round takes a while, so the other's round overlaps it and both try the same cases.
const CASES = 120;

/** How often each case and step is named in the escalation notices: in a notice of its own, or a digest's line. */
function namedIn(mails: Array<{ subject: string; text: string }>): Map<string, number> {
  const named = new Map<string, number>();
  for (const mail of mails) {
    const digest = /escalation step (\d+)\)$/.exec(mail.subject);
    const step = digest ? digest[1] : /Escalation step (\d+)\./.exec(mail.text)?.[1];
    const numbers = digest ? [...mail.text.matchAll(/^- Case ([^:]+):/gm)].map((m) => m[1]) : [/case ([^)]+)\)$/.exec(mail.subject)?.[1]];
    for (const number of numbers) named.set(`${number} step ${step}`, (named.get(`${number} step ${step}`) ?? 0) + 1);
  }
  return named;
}

// Two processes on one SQLite file (WAL allows several on one machine). On PostgreSQL the same
// first-writer-wins update is exercised by the failover test's two processes.
describe.skipIf(onPostgres)('escalation with two processes on one database', () => {
  const dataDir = tempDataDir('plumbline-jobs-');
  const servers: ChildServer[] = [];
  afterAll(async () => {
    for (const server of servers) await server.dispose();
  });

  it('marks each overdue case once and sends each step of its escalation once', async () => {
    const db = createDb(databaseFileOf(dataDir));
    const caseNumbers: string[] = [];
    try {
      await migrate(db);
      const ids = await seedDemo(db, systemClock);
      const medic = await db('users').where({ email: 'paramedic@plumbline.test' }).first('id');
      const me = (await loadMe(db, medic.id))!;
      // Sent an hour ago and never acknowledged: past every escalation step of both hospitals
      // (2 and 10 minutes in the demo, with a later step at twice that).
      const anHourAgo = { now: () => Date.now() - HOUR };
      const hospitals = [ids.hospitals.general, ...Object.values(ids.hospitals).filter((id) => id !== ids.hospitals.general)];
      for (let i = 0; i < CASES; i++) {
        // A fall over 10 ft is 2021 moderate risk [source: Newgard 2022, as in pre-alert.test.ts].
        const { caseId } = await submitPreAlert(db, anHourAgo, { me, role: 'paramedic' }, { clientId: randomUUID(), hospitalId: hospitals[i % hospitals.length], etaMinutes: 20, clinical: { ageYears: 30 + i, sex: 'female', fall: { heightM: 4 }, vitals: { sbp: 124, hr: 92 } } } as never);
        caseNumbers.push((await db('cases').where({ id: caseId }).first('case_number')).case_number);
      }
    } finally {
      await db.destroy();
    }

    // Started together: each process looks for overdue cases a second after it starts, then every 15 s.
    servers.push(await childServer({ dataDir }), await childServer({ dataDir }));
    await Promise.all(servers.map((s) => s.start()));
    const check = createDb(databaseFileOf(dataDir));
    try {
      const ours = () => check('cases').whereIn('case_number', caseNumbers);
      const until = Date.now() + 30_000;
      while (Date.now() < until && Number((await ours().whereNull('overdue_at').count({ n: '*' }).first())!.n) > 0) await new Promise((r) => setTimeout(r, 250));
      const cases = await ours().select('id', 'case_number', 'escalation_step', 'overdue_at');
      const notices = () => check('mail_messages').where('subject', 'like', 'Not acknowledged%').select('subject', 'text');
      // A round that won a case sends its mail after the change commits: until every case is named, then a moment more.
      const wanted = cases.flatMap((c) => Array.from({ length: Number(c.escalation_step) }, (_, i) => `${c.case_number} step ${i + 1}`));
      const unnamed = async () => {
        const named = namedIn(await notices());
        return wanted.filter((key) => !named.has(key)).length;
      };
      while (Date.now() < until + 30_000 && (await unnamed()) > 0) await new Promise((r) => setTimeout(r, 250));
      await new Promise((r) => setTimeout(r, 2000));
      expect(cases.every((c) => c.overdue_at != null)).toBe(true);

      // The case's record: one "overdue" event each, and one "escalated" per later step.
      const events = await check('case_events').whereIn('case_id', cases.map((c) => c.id)).whereIn('kind', ['overdue', 'escalated']).select('case_id', 'kind', 'data');
      for (const c of cases) {
        const mine = events.filter((e) => e.case_id === c.id);
        const steps = mine.map((e) => JSON.parse(e.data).step).sort();
        expect(steps).toEqual(Array.from({ length: Number(c.escalation_step) }, (_, i) => i + 1));
        expect(mine.filter((e) => e.kind === 'overdue')).toHaveLength(1);
      }

      // The e-mails: each case named once per step, in a notice of its own or in a digest.
      const mails = await notices();
      const named = namedIn(mails);
      console.info(`jobs-cluster: ${mails.length} escalation e-mails for ${cases.length} cases (one digest per hospital and step when one process took them all)`);
      for (const key of wanted) expect(named.get(key), key).toBe(1);
      expect([...named.values()].every((n) => n === 1)).toBe(true);
    } finally {
      await check.destroy();
    }
  }, 120_000);
});
