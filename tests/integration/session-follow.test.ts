import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { CaseSummary } from '../../shared/schemas/cases';
import { onPostgres } from '../support/database';
import { startTestServer, type TestServer } from '../support/server';
import { signIn, type SignedInClient } from '../support/sign-in';
import { command, connectAs, nextEvent, type TestSocket } from '../support/socket';

// A socket follows its session: signing out, an administrator's change of roles or places, a
// password reset and the session's expiry each reach the person's open sockets within 2 s. The
// people here are made for the test by the county administrator, as they would be in real use.

const WITHIN_MS = 2000;
const PASSWORD = 'a-long-test-password';
// A fall from 6 m: over 10 ft (3.048 m), a 2021 moderate-risk criterion [source: Newgard 2022].
const clinical = { ageYears: 58, sex: 'male', fall: { heightM: 6, surface: 'concrete' } };

let server: TestServer;
let admin: SignedInClient;
let ids: { general: number; community: number; agency: number };
const sockets: TestSocket[] = [];

async function person(email: string, roles: string[], memberships: Array<{ kind: 'hospital' | 'agency'; id: number }>): Promise<number> {
  const created = await admin.send('POST', '/api/people/users', { email, name: email.split('@')[0], roles, memberships });
  expect(created.status).toBe(201);
  const id = (await created.json()).id as number;
  expect((await admin.send('POST', `/api/people/users/${id}/password`, { password: PASSWORD })).status).toBe(200);
  return id;
}

async function open(client: SignedInClient): Promise<TestSocket> {
  const socket = await connectAs(server.url, client);
  sockets.push(socket);
  return socket;
}

/** Resolves with the disconnect reason and how long after `since` it came. */
function disconnection(socket: TestSocket, since: () => number): Promise<{ reason: string; afterMs: number }> {
  return new Promise((resolve) => socket.once('disconnect', (reason) => resolve({ reason, afterMs: Date.now() - since() })));
}

async function roomsOf(socket: TestSocket): Promise<string[]> {
  const ack = await socket.timeout(5000).emitWithAck('session:rooms');
  if (!ack.ok) throw new Error(ack.error.message);
  return ack.data.rooms.sort();
}

beforeAll(async () => {
  server = await startTestServer();
  admin = await signIn(server.url, 'admin@plumbline.test');
  const db = server.db;
  ids = {
    general: (await db('hospitals').where({ short_name: 'Alderwick General' }).first('id')).id,
    community: (await db('hospitals').where({ short_name: 'Fenmoor Community' }).first('id')).id,
    agency: (await db('agencies').first('id')).id,
  };
}, 60_000);
afterAll(async () => {
  sockets.forEach((s) => s.close());
  await server?.close();
});

describe('a socket follows its session', () => {
  it('closes as its session signs out, within 2 s, while the same person’s other device stays connected', async () => {
    await person('two.devices@plumbline.test', ['paramedic'], [{ kind: 'agency', id: ids.agency }]);
    const tablet = await signIn(server.url, 'two.devices@plumbline.test', PASSWORD);
    const phone = await signIn(server.url, 'two.devices@plumbline.test', PASSWORD);
    const tabletSocket = await open(tablet);
    const phoneSocket = await open(phone);
    let signedOutAt = 0;
    const closed = disconnection(tabletSocket, () => signedOutAt);
    signedOutAt = Date.now();
    const out = await tablet.send('POST', '/auth/logout');
    expect(out.status).toBe(200);
    const { reason, afterMs } = await closed;
    expect(reason).toBe('io server disconnect');
    expect(afterMs).toBeLessThan(WITHIN_MS);
    // The phone's session is its own: it still sends.
    const sent = await command(phoneSocket, 'case:submit', { clientId: randomUUID(), hospitalId: ids.general, clinical });
    expect(sent.ok).toBe(true);
    expect(phoneSocket.connected).toBe(true);
  });

  it('stops a paramedic’s socket from sending as soon as the paramedic role is taken away', async () => {
    const id = await person('role.change@plumbline.test', ['paramedic'], [{ kind: 'agency', id: ids.agency }]);
    const crew = await signIn(server.url, 'role.change@plumbline.test', PASSWORD);
    const socket = await open(crew);
    expect((await command(socket, 'case:submit', { clientId: randomUUID(), hospitalId: ids.general, clinical })).ok).toBe(true);
    expect(await roomsOf(socket)).toEqual([`agency:${ids.agency}`, `user:${id}`]);

    const changed = await admin.send('PATCH', `/api/people/users/${id}`, { roles: ['charge_nurse'], memberships: [{ kind: 'hospital', id: ids.general }] });
    expect(changed.status).toBe(200);
    const casesBefore = await server.db('cases').count({ n: '*' }).first();
    const refused = await command(socket, 'case:submit', { clientId: randomUUID(), hospitalId: ids.general, clinical });
    expect(refused).toMatchObject({ ok: false, error: { code: 'forbidden' } });
    expect(await server.db('cases').count({ n: '*' }).first()).toEqual(casesBefore);
    // The same socket now sits in the hospital's room, not the agency's.
    expect(await roomsOf(socket)).toEqual([`hospital:${ids.general}`, `user:${id}`]);
  });

  it('moves a nurse’s open socket to the new hospital: the old board’s cases stop, the new one’s arrive', async () => {
    const id = await person('moving.nurse@plumbline.test', ['charge_nurse'], [{ kind: 'hospital', id: ids.general }]);
    const nurse = await signIn(server.url, 'moving.nurse@plumbline.test', PASSWORD);
    const board = await open(nurse);
    const crewSocket = await open(await signIn(server.url, 'paramedic@plumbline.test'));

    expect((await admin.send('PATCH', `/api/people/users/${id}`, { memberships: [{ kind: 'hospital', id: ids.community }] })).status).toBe(200);
    const heard: CaseSummary[] = [];
    board.on('case:submitted', (summary) => heard.push(summary));
    const toCommunity = nextEvent<[CaseSummary]>(board, 'case:submitted', 3000, (s) => s.hospital.id === ids.community);
    const general = await command<{ caseId: number }>(crewSocket, 'case:submit', { clientId: randomUUID(), hospitalId: ids.general, clinical });
    const community = await command<{ caseId: number }>(crewSocket, 'case:submit', { clientId: randomUUID(), hospitalId: ids.community, clinical });
    expect(general.ok && community.ok).toBe(true);
    const [arrived] = await toCommunity;
    expect(arrived.id).toBe(community.ok ? community.data.caseId : -1);
    await new Promise((r) => setTimeout(r, 300));
    expect(heard.map((s) => s.hospital.id)).toEqual([ids.community]);
  });

  it('disconnects every socket of a person whose password an administrator resets, and their session ends', async () => {
    const id = await person('reset.me@plumbline.test', ['charge_nurse'], [{ kind: 'hospital', id: ids.community }]);
    const nurse = await signIn(server.url, 'reset.me@plumbline.test', PASSWORD);
    const socket = await open(nurse);
    let resetAt = 0;
    const closed = disconnection(socket, () => resetAt);
    resetAt = Date.now();
    expect((await admin.send('POST', `/api/people/users/${id}/password`, { password: 'another-long-password' })).status).toBe(200);
    const { reason, afterMs } = await closed;
    expect(reason).toBe('io server disconnect');
    expect(afterMs).toBeLessThan(WITHIN_MS);
    expect((await nurse.get('/api/me')).status).toBe(401);
    await expect(connectAs(server.url, nurse)).rejects.toThrow('unauthenticated');
  });

  it('disconnects a socket within 2 s of its session expiring', async () => {
    await person('expiring@plumbline.test', ['charge_nurse'], [{ kind: 'hospital', id: ids.general }]);
    const nurse = await signIn(server.url, 'expiring@plumbline.test', PASSWORD);
    const socket = await open(nurse);
    const userId = (await (await nurse.get('/api/me')).json()).user.id as number;
    let expiredAt = 0;
    const closed = disconnection(socket, () => expiredAt);
    // The session store's own record of when the session ends, as twelve idle hours would leave it.
    expiredAt = Date.now();
    const changed = await server.db('sessions').whereRaw(onPostgres ? "(sess->>'userId')::int = ?" : "json_extract(sess, '$.userId') = ?", [userId]).update({ expired: new Date(expiredAt - 1000).toISOString() });
    expect(changed).toBe(1);
    const { reason, afterMs } = await closed;
    expect(reason).toBe('io server disconnect');
    expect(afterMs).toBeLessThan(WITHIN_MS);
  });
});
