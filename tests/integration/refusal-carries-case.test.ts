import { randomUUID } from 'node:crypto';
import { afterAll, afterEach, beforeAll, describe, expect, it, vi } from 'vitest';
import type { CaseSummary } from '../../shared/schemas/cases';
import { actOnCase, refusedCase } from '../../src/api/board';
import { ApiError } from '../../src/api/http';
import { startTestServer, type TestServer } from '../support/server';
import { signIn, type SignedInClient } from '../support/sign-in';
import { command, connectAs, type TestSocket } from '../support/socket';

// A refusal on a case carries the case as it now stands, so the screen that lost catches up from
// the answer itself: the board's REST actions (through the client's own API module) and the crew's
// socket commands (as the crew may read the case).

let server: TestServer;
let nurse: SignedInClient;
let medic: SignedInClient;
let crew: TestSocket;
let general: number;

// 2021 guideline (Newgard 2022) [source]: SBP < 90 at age 10–64 is high risk; the example policy
// (SOURCES.md §6 [ours]) calls its full level for it.
const hypotensiveRoofer = { ageYears: 34, sex: 'male', fall: { heightM: 4, surface: 'concrete', firstImpact: 'back' }, vitals: { sbp: 84, hr: 120 } };

async function submit(): Promise<CaseSummary> {
  const answer = await command<{ summary: CaseSummary }>(crew, 'case:submit', { clientId: randomUUID(), hospitalId: general, etaMinutes: 10, clinical: hypotensiveRoofer });
  if (!answer.ok) throw new Error(answer.error.message);
  return answer.data.summary;
}

async function act(summary: Pick<CaseSummary, 'id' | 'rowVersion'>, action: string, body: Record<string, unknown> = {}): Promise<CaseSummary> {
  const res = await nurse.send('POST', `/api/cases/${summary.id}/${action}`, { rowVersion: summary.rowVersion, ...body });
  if (res.status !== 200) throw new Error(`${action}: HTTP ${res.status}`);
  return (await res.json()).case;
}

const current = async (id: number): Promise<CaseSummary> => (await (await nurse.get(`/api/cases/${id}`)).json()).case;

/** The client's API module calls same-origin paths, as in the browser; here they reach the test server with the nurse's session. */
function browseAs(client: SignedInClient): void {
  vi.stubGlobal('fetch', (path: string, init: RequestInit = {}) =>
    client.fetch(new URL(path, server.url), { ...init, headers: { ...(init.headers as Record<string, string>), origin: new URL(server.url).origin } }),
  );
}

beforeAll(async () => {
  server = await startTestServer();
  general = (await server.db('hospitals').where({ name: 'Alderwick General Hospital' }).first('id')).id;
  nurse = await signIn(server.url, 'nurse@plumbline.test');
  medic = await signIn(server.url, 'paramedic@plumbline.test');
  crew = await connectAs(server.url, medic);
});
afterEach(() => {
  vi.unstubAllGlobals();
});
afterAll(async () => {
  crew?.close();
  await server?.close();
});

describe('a board action refused because the case changed first', () => {
  it('answers 409 with the case as it now stands, and the client’s ApiError keeps that body', async () => {
    const seen = await submit();
    const acknowledged = await act(seen, 'acknowledge');
    browseAs(nurse);
    // The board still holds the version it saw before the acknowledgement.
    const refusal = await actOnCase(seen.id, 'decide', { rowVersion: seen.rowVersion, level: 'full' }).then(
      () => null,
      (err: unknown) => err,
    );
    expect(refusal).toBeInstanceOf(ApiError);
    const error = refusal as ApiError;
    expect([error.status, error.code]).toEqual([409, 'conflict']);
    expect(error.body).toEqual({ error: { code: 'conflict', message: error.message }, case: await current(seen.id) });
    expect(refusedCase(error, seen.id)).toEqual(acknowledged);
    expect(refusedCase(error, seen.id)?.rowVersion).toBe(seen.rowVersion + 1);
    // Another case's id, or an error without a case, gives nothing to show.
    expect(refusedCase(error, seen.id + 1)).toBeNull();
    expect(refusedCase(new ApiError(409, 'conflict', 'x', undefined, [], { error: { code: 'conflict', message: 'x' } }), seen.id)).toBeNull();
  });

  it('a refusal that is not about the case (a bad reason) carries no case', async () => {
    const seen = await act(await submit(), 'acknowledge');
    browseAs(nurse);
    const refusal = (await actOnCase(seen.id, 'decide', { rowVersion: seen.rowVersion, level: 'consult' }).catch((err: unknown) => err)) as ApiError;
    expect([refusal.status, refusal.field]).toEqual([400, 'reason']);
    expect(refusedCase(refusal, seen.id)).toBeNull();
  });
});

describe('a crew command refused because the case has ended', () => {
  it('acknowledges the refusal with the case as the crew may read it', async () => {
    const seen = await submit();
    const acknowledged = await act(seen, 'acknowledge');
    const reason = 'Trauma lead reviewed the pictures: limited team enough';
    const decided = await act(acknowledged, 'decide', { level: 'limited', reason });
    await act(decided, 'close', { reason: 'Taken to theatre elsewhere' });
    const closed = await current(seen.id);
    expect([closed.state, closed.decidedReason]).toEqual(['closed', reason]);

    // Any change will do: a closed case is refused before the change is read.
    const late = await command(crew, 'case:update', { caseId: seen.id, etaMinutes: 5, changes: { vitals: { sbp: 80, hr: 124 } } });
    expect(late.ok).toBe(false);
    if (late.ok) return;
    expect([late.error.code, late.error.message]).toEqual(['conflict', `Case ${seen.caseNumber} is closed; it can no longer be changed.`]);
    // The crew reads the case through its agency: everything but the nurse's reason for the level.
    expect(late.error.case).toEqual({ ...closed, decidedReason: null });
  });
});
