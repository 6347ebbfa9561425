import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startTestServer, type TestServer } from '../support/server';
import { signIn } from '../support/sign-in';
import { command, connectAs, nextEvent } from '../support/socket';

let server: TestServer;
beforeAll(async () => {
  server = await startTestServer();
});
afterAll(() => server?.close());

describe('socket connections', () => {
  it('refuses an anonymous connection', async () => {
    await expect(connectAs(server.url, null)).rejects.toThrow('unauthenticated');
  });

  it('refuses a connection whose session has ended', async () => {
    const client = await signIn(server.url, 'nurse@plumbline.test');
    await client.send('POST', '/auth/logout');
    await expect(connectAs(server.url, client)).rejects.toThrow('unauthenticated');
  });

  it('joins a charge nurse to their own hospital and user rooms only', async () => {
    const client = await signIn(server.url, 'nurse@plumbline.test');
    const me = await (await client.get('/api/me')).json();
    const hospitalId = me.memberships.find((m: { kind: string }) => m.kind === 'hospital').id;
    const socket = await connectAs(server.url, client);
    const rooms = await new Promise<string[]>((resolve) => socket.emit('session:rooms', (answer) => resolve(answer.ok ? answer.data.rooms : [])));
    socket.close();
    expect(rooms.sort()).toEqual([`hospital:${hospitalId}`, `user:${me.user.id}`].sort());
  });

  it('joins a paramedic to their agency room, and tells them so on connect', async () => {
    const client = await signIn(server.url, 'paramedic@plumbline.test');
    const me = await (await client.get('/api/me')).json();
    const socket = await connectAs(server.url, client);
    const rooms = await new Promise<string[]>((resolve) => socket.emit('session:rooms', (answer) => resolve(answer.ok ? answer.data.rooms : [])));
    socket.close();
    expect(rooms.sort()).toEqual([`agency:${me.memberships[0].id}`, `user:${me.user.id}`].sort());
  });

  it('refuses a browser connection from another site', async () => {
    const res = await fetch(`${server.url}/socket.io/?EIO=4&transport=polling`, { headers: { origin: 'http://elsewhere.example' } });
    expect(res.status).toBe(403);
  });
});

describe('a pre-alert reaches the destination board', () => {
  it('is acknowledged with the case number and announced to the hospital room', async () => {
    const medic = await signIn(server.url, 'paramedic@plumbline.test');
    const nurse = await signIn(server.url, 'nurse@plumbline.test');
    const nurseMe = await (await nurse.get('/api/me')).json();
    const board = await connectAs(server.url, nurse);
    const crew = await connectAs(server.url, medic);
    const announced = nextEvent<[{ caseNumber: string; recommendedLevel: string }]>(board, 'case:submitted');
    const answer = await command<{ caseNumber: string; created: boolean }>(crew, 'case:submit', {
      clientId: randomUUID(),
      hospitalId: nurseMe.memberships[0].id,
      etaMinutes: 12,
      // 2021 guideline (Newgard 2022) [source]: SBP < 90 at age 10–64 is high risk; the example policy calls full.
      clinical: { ageYears: 34, sex: 'male', fall: { heightM: 4 }, vitals: { sbp: 84, hr: 120 } },
    });
    expect(answer.ok).toBe(true);
    if (!answer.ok) return;
    expect(answer.data.created).toBe(true);
    const [summary] = await announced;
    expect(summary.caseNumber).toBe(answer.data.caseNumber);
    expect(summary.recommendedLevel).toBe('full');
    board.close();
    crew.close();
  });
});
