import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, expect, it } from 'vitest';
import type { CaseSummary } from '../../shared/schemas/cases';
import { OPEN_STATES } from '../../shared/schemas/cases';
import { listCaseSummariesPage } from '../../server/services/cases/summary';
import { startTestServer, type TestServer } from '../support/server';
import { signIn } from '../support/sign-in';
import { command, connectAs, type TestSocket } from '../support/socket';

// No silent truncation: when a list must be cut, the most urgent stay and the answer says how
// many were left out. Check values: SBP < 90 at 10–64 is high risk [source: Newgard 2022] → the
// example policy's full team; a 1 m fall with normal signs meets no criterion → no activation.
let server: TestServer;
let crew: TestSocket;
let general: number;

async function submit(clinical: unknown, etaMinutes: number): Promise<CaseSummary> {
  const answer = await command<{ summary: CaseSummary }>(crew, 'case:submit', { clientId: randomUUID(), hospitalId: general, etaMinutes, clinical });
  if (!answer.ok) throw new Error(answer.error.message);
  return answer.data.summary;
}

beforeAll(async () => {
  server = await startTestServer();
  general = (await server.db('hospitals').where({ name: 'Alderwick General Hospital' }).first('id')).id;
  crew = await connectAs(server.url, await signIn(server.url, 'paramedic@plumbline.test'));
});
afterAll(async () => {
  crew?.close();
  await server?.close();
});

it('a flood of low-level pre-alerts cut at the cap still lists a later full-team case first, and says how many it left out', async () => {
  const low = { ageYears: 30, sex: 'female', fall: { heightM: 1, surface: 'grass' }, vitals: { sbp: 125, hr: 75 } };
  for (let i = 0; i < 12; i++) await submit(low, 1);
  const real = await submit({ ageYears: 45, sex: 'male', fall: { heightM: 6, surface: 'concrete' }, vitals: { sbp: 84, hr: 120 } }, 40);
  const open = Number((await server.db('cases').where({ hospital_id: general }).whereIn('state', OPEN_STATES).count({ n: '*' }).first())!.n);

  const page = await listCaseSummariesPage(server.db, { hospitalIds: [general], states: OPEN_STATES, limit: 5 });
  const listed = JSON.parse(page.json) as CaseSummary[];
  expect([page.listed, page.total]).toEqual([5, open]);
  expect(listed.map((c) => c.id)).toContain(real.id);
  expect(listed.every((c) => c.acknowledgedAt == null || c.levelRose)).toBe(true);

  // The board's whole list carries the count, so it can say what it does not show.
  const nurse = await signIn(server.url, 'nurse@plumbline.test');
  const board = await (await nurse.get('/api/board')).json();
  expect(board.openTotal).toBe(open);
  expect(board.cases.length).toBe(open);
});
