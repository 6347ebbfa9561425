import { randomUUID } from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startTestServer, type TestServer } from '../support/server';
import { browserlessClient, signIn, type SignedInClient } from '../support/sign-in';
import { command, connectAs } from '../support/socket';

let server: TestServer;
let admin: SignedInClient;
let general: number;
let community: number;
let agency: number;

const auditRows = (entity: string, entityId: number) => server.db('audit_log').where({ entity, entity_id: String(entityId) }).orderBy('id').pluck('action');
const userId = async (email: string) => (await server.db('users').where({ email }).first('id')).id as number;

beforeAll(async () => {
  server = await startTestServer();
  admin = await signIn(server.url, 'admin@plumbline.test');
  const hospitals = await server.db('hospitals').orderBy('id').select('id', 'short_name');
  general = hospitals.find((h) => h.short_name === 'Alderwick General').id;
  community = hospitals.find((h) => h.short_name === 'Fenmoor Community').id;
  agency = (await server.db('agencies').first('id')).id;
});
afterAll(() => server?.close());

describe('who may manage people and places', () => {
  it.each(['/api/people/users', '/api/people/hospitals', '/api/people/agencies'])('GET %s: 401 signed out, 403 for a trauma lead, 200 for the admin', async (path) => {
    expect((await browserlessClient(server.url).get(path)).status).toBe(401);
    const lead = await signIn(server.url, 'lead@plumbline.test');
    const refused = await lead.get(path);
    expect(refused.status).toBe(403);
    expect((await refused.json()).error.message).toBe('This needs one of these roles: admin.');
    expect((await admin.get(path)).status).toBe(200);
  });

  it("refuses an admin a hospital they are not a member of, and that hospital's people", async () => {
    const [outside] = await server.db('hospitals').insert({ name: 'Quarrymoor Cottage Hospital', short_name: 'Quarrymoor', trauma_level: 'none', height_unit: 'm', escalation_minutes: 2, created_at: Date.now() }).returning('id');
    const [stranger] = await server.db('users').insert({ email: 'stranger@plumbline.test', name: 'Ode Stranger', active: true, created_at: Date.now() }).returning('id');
    await server.db('memberships').insert({ user_id: stranger.id, hospital_id: outside.id, agency_id: null });
    expect((await admin.send('PATCH', `/api/people/hospitals/${outside.id}`, { escalationMinutes: 9 })).status).toBe(403);
    expect((await admin.send('PATCH', `/api/people/users/${stranger.id}`, { name: 'Renamed' })).status).toBe(403);
    expect((await admin.send('POST', `/api/people/users/${stranger.id}/deactivate`)).status).toBe(403);
    const people = await (await admin.get('/api/people/users')).json();
    expect(people.map((p: { email: string }) => p.email)).not.toContain('stranger@plumbline.test');
    const res = await admin.send('POST', '/api/people/users', { email: 'new@plumbline.test', name: 'New Person', roles: ['charge_nurse'], memberships: [{ kind: 'hospital', id: outside.id }] });
    expect(res.status).toBe(400);
    expect((await res.json()).error.message).toBe('memberships[0]: that hospital is not one of yours');
  });
});

describe('people', () => {
  it('adds a person with roles and memberships, audited', async () => {
    const res = await admin.send('POST', '/api/people/users', { email: 'ines.farrow@plumbline.test', name: 'Ines Farrow', roles: ['charge_nurse', 'quality'], memberships: [{ kind: 'hospital', id: community }] });
    expect(res.status).toBe(201);
    const person = await res.json();
    expect(person).toEqual({ id: person.id, email: 'ines.farrow@plumbline.test', name: 'Ines Farrow', active: true, roles: ['charge_nurse', 'quality'], memberships: [{ kind: 'hospital', id: community, name: 'Fenmoor Community Hospital' }] });
    expect(await auditRows('user', person.id)).toEqual(['user.created']);
  });

  it('gives a new person a password for the built-in sign-in, so they can sign in through the real flow', async () => {
    const created = await (await admin.send('POST', '/api/people/users', { email: 'tomas.reyne@plumbline.test', name: 'Tomas Reyne', roles: ['charge_nurse'], memberships: [{ kind: 'hospital', id: community }] })).json();
    await expect(signIn(server.url, 'tomas.reyne@plumbline.test', 'a-new-password')).rejects.toThrow(/HTTP 401/);
    const short = await admin.send('POST', `/api/people/users/${created.id}/password`, { password: 'short' });
    expect(short.status).toBe(400);
    expect((await short.json()).error).toMatchObject({ field: 'password', message: 'password: must be at least 10 characters' });
    const set = await admin.send('POST', `/api/people/users/${created.id}/password`, { password: 'a-new-password' });
    expect(set.status).toBe(200);
    const me = await (await (await signIn(server.url, 'tomas.reyne@plumbline.test', 'a-new-password')).get('/api/me')).json();
    expect([me.user.email, me.roles]).toEqual(['tomas.reyne@plumbline.test', ['charge_nurse']]);
    const audit = await server.db('audit_log').where({ entity: 'user', entity_id: String(created.id) }).orderBy('id').select('action', 'after');
    expect(audit.map((row) => row.action)).toEqual(['user.created', 'user.password-set']);
    // The audit row records that the password changed (and the sessions it ended), never the password.
    expect(JSON.parse(audit[1].after)).toEqual({ passwordSet: true, sessionsEnded: 0, identitySessionsEnded: 0 });
  });

  it('refuses an e-mail that is not an address, and a second account for one address', async () => {
    const bad = await admin.send('POST', '/api/people/users', { email: 'ines at fenmoor', name: 'Ines', roles: ['quality'], memberships: [{ kind: 'hospital', id: community }] });
    expect(bad.status).toBe(400);
    expect((await bad.json()).error).toMatchObject({ field: 'email', message: 'email: "ines at fenmoor" is not an e-mail address' });
    const twice = await admin.send('POST', '/api/people/users', { email: 'INES.FARROW@plumbline.test', name: 'Ines', roles: ['quality'], memberships: [{ kind: 'hospital', id: community }] });
    expect(twice.status).toBe(409);
  });

  it('changes roles and memberships in one audited step', async () => {
    const id = await userId('ines.farrow@plumbline.test');
    const res = await admin.send('PATCH', `/api/people/users/${id}`, { roles: ['trauma_lead'], memberships: [{ kind: 'hospital', id: general }] });
    expect(res.status).toBe(200);
    const person = await res.json();
    expect([person.roles, person.memberships.map((m: { id: number }) => m.id)]).toEqual([['trauma_lead'], [general]]);
    expect(await auditRows('user', id)).toEqual(['user.created', 'user.updated']);
  });

  it('will not let an admin take their own admin role or deactivate themselves', async () => {
    const me = await userId('admin@plumbline.test');
    expect((await admin.send('PATCH', `/api/people/users/${me}`, { roles: ['quality'] })).status).toBe(403);
    expect((await admin.send('POST', `/api/people/users/${me}/deactivate`)).status).toBe(409);
  });

  it('deactivating a person ends their sessions and disconnects their sockets', async () => {
    const nurse = await signIn(server.url, 'nurse@plumbline.test');
    expect((await nurse.get('/api/me')).status).toBe(200);
    const socket = await connectAs(server.url, nurse);
    const disconnected = new Promise<string>((resolve) => socket.once('disconnect', (reason) => resolve(reason)));
    const id = await userId('nurse@plumbline.test');
    const res = await admin.send('POST', `/api/people/users/${id}/deactivate`);
    expect(res.status).toBe(200);
    expect((await res.json()).active).toBe(false);
    expect(await disconnected).toBe('io server disconnect');
    expect((await nurse.get('/api/me')).status).toBe(401);
    await expect(signIn(server.url, 'nurse@plumbline.test')).rejects.toThrow(/HTTP 401/);
    const row = await server.db('audit_log').where({ entity: 'user', entity_id: String(id) }).orderBy('id', 'desc').first('action', 'after');
    // The session at the built-in identity provider ended too, so no sign-in skips the password.
    expect([row.action, JSON.parse(row.after)]).toEqual(['user.deactivated', { active: false, sessionsEnded: 1, identitySessionsEnded: 1 }]);
  });

  it('reactivating lets them sign in again', async () => {
    const id = await userId('nurse@plumbline.test');
    expect((await admin.send('POST', `/api/people/users/${id}/reactivate`)).status).toBe(200);
    const nurse = await signIn(server.url, 'nurse@plumbline.test');
    expect((await nurse.get('/api/me')).status).toBe(200);
    expect((await auditRows('user', id)).slice(-2)).toEqual(['user.deactivated', 'user.reactivated']);
  });
});

describe('hospitals', () => {
  it('lists the demo notification lists', async () => {
    const hospitals = await (await admin.get('/api/people/hospitals')).json();
    const alderwick = hospitals.find((h: { id: number }) => h.id === general);
    expect(alderwick.lists.escalation).toEqual(['ed-nurse-in-charge@alderwick-general.plumbline.test']);
    expect([alderwick.traumaLevel, alderwick.heightUnit, alderwick.escalationMinutes]).toEqual(['I', 'ft', 2]);
  });

  it('refuses a notification list entry that is not an address, naming the entry', async () => {
    const res = await admin.send('PATCH', `/api/people/hospitals/${general}`, { lists: { full: ['trauma-full@alderwick-general.plumbline.test', 'pager 4411'], limited: [], consult: [], escalation: [] } });
    expect(res.status).toBe(400);
    const body = await res.json();
    expect([body.error.field, body.error.message]).toEqual(['lists.full[1]', 'lists.full[1]: "pager 4411" is not an e-mail address']);
    expect(await auditRows('hospital', general)).toEqual([]);
  });

  it('saves fields and lists in one audited change', async () => {
    const lists = { full: ['Resus-Lead@alderwick-general.plumbline.test'], limited: [], consult: ['consult@alderwick-general.plumbline.test'], escalation: [] };
    const res = await admin.send('PATCH', `/api/people/hospitals/${general}`, { heightUnit: 'm', escalationMinutes: 4, lists });
    expect(res.status).toBe(200);
    const saved = await res.json();
    // A client that does not send the later 'senior' list saves it empty.
    expect([saved.heightUnit, saved.escalationMinutes, saved.lists]).toEqual(['m', 4, { ...lists, senior: [], full: ['resus-lead@alderwick-general.plumbline.test'] }]);
    expect(await auditRows('hospital', general)).toEqual(['hospital.updated']);
  });

  it('sets the time zone and the later escalation steps, audited with the hospital; the escalation reads them', async () => {
    const steps = [{ times: 2, list: 'senior' }, { times: 3, list: 'full' }];
    const res = await admin.send('PATCH', `/api/people/hospitals/${general}`, { timeZone: 'Europe/London', escalationLaterSteps: steps });
    expect(res.status).toBe(200);
    const saved = await res.json();
    expect([saved.timeZone, saved.escalationLaterSteps]).toEqual(['Europe/London', steps]);
    const audit = await server.db('audit_log').where({ entity: 'hospital', entity_id: String(general) }).orderBy('id', 'desc').first('action', 'before', 'after');
    expect(audit.action).toBe('hospital.updated');
    expect(JSON.parse(audit.after)).toMatchObject({ timeZone: 'Europe/London', escalationLaterSteps: steps });
    expect(JSON.parse(audit.before).escalationLaterSteps).toEqual([{ times: 2, list: 'senior' }]);
    // The escalation job's own reading: N, 2N to the senior list, 3N to the full team's list.
    const { escalationSteps } = await import('../../server/services/jobs/escalation');
    expect(await escalationSteps(server.db, general, 4)).toEqual([{ afterMinutes: 4, list: 'escalation' }, { afterMinutes: 8, list: 'senior' }, { afterMinutes: 12, list: 'full' }]);
    // The other hospital keeps the product-wide steps.
    expect(await escalationSteps(server.db, community, 5)).toEqual([{ afterMinutes: 5, list: 'escalation' }, { afterMinutes: 10, list: 'senior' }]);
  });

  it('refuses a made-up time zone and steps out of order, naming the field; nothing changes', async () => {
    const before = await auditRows('hospital', general);
    const zone = await admin.send('PATCH', `/api/people/hospitals/${general}`, { timeZone: 'Alderwick/Harbour' });
    expect(zone.status).toBe(400);
    expect((await zone.json()).error.field).toBe('timeZone');
    const order = await admin.send('PATCH', `/api/people/hospitals/${general}`, { escalationLaterSteps: [{ times: 3, list: 'senior' }, { times: 2, list: 'full' }] });
    expect(order.status).toBe(400);
    expect((await order.json()).error.message).toBe('escalationLaterSteps[1].times: must be later than the step before it');
    const first = await admin.send('PATCH', `/api/people/hospitals/${general}`, { escalationLaterSteps: [{ times: 1, list: 'senior' }] });
    expect(first.status).toBe(400);
    expect(await auditRows('hospital', general)).toEqual(before);
    const hospital = (await (await admin.get('/api/people/hospitals')).json()).find((h: { id: number }) => h.id === general);
    expect(hospital.timeZone).toBe('Europe/London');
  });

  it('refuses an escalation time of 0 minutes, naming the field', async () => {
    const res = await admin.send('PATCH', `/api/people/hospitals/${general}`, { escalationMinutes: 0 });
    expect(res.status).toBe(400);
    expect((await res.json()).error.message).toBe('escalationMinutes: must be at least 1');
  });
});

describe('ambulance agencies', () => {
  it('adds a unit, takes it out of service, and refuses a duplicate call sign', async () => {
    const added = await admin.send('POST', `/api/people/agencies/${agency}/units`, { callSign: 'Medic 31' });
    expect(added.status).toBe(201);
    const unit = (await added.json()).units.find((u: { callSign: string }) => u.callSign === 'Medic 31');
    expect(unit.active).toBe(true);
    const out = await (await admin.send('PATCH', `/api/people/units/${unit.id}`, { active: false })).json();
    expect(out.units.find((u: { id: number }) => u.id === unit.id).active).toBe(false);
    expect((await admin.send('POST', `/api/people/agencies/${agency}/units`, { callSign: 'Medic 31' })).status).toBe(409);
    expect(await auditRows('unit', unit.id)).toEqual(['unit.created', 'unit.updated']);
  });

  it('sets where the agency takes patients; a paramedic can then no longer send to a dropped hospital', async () => {
    const res = await admin.send('PUT', `/api/people/agencies/${agency}/destinations`, { hospitalIds: [general] });
    expect(res.status).toBe(200);
    expect((await res.json()).destinations).toEqual([general]);
    expect(await server.db('agency_hospitals').where({ agency_id: agency }).pluck('hospital_id')).toEqual([general]);
    expect(await auditRows('agency', agency)).toEqual(['agency.destinations-set']);
    const paramedic = await signIn(server.url, 'paramedic@plumbline.test');
    const socket = await connectAs(server.url, paramedic);
    const clinical = { ageYears: 40, sex: 'male', fall: { heightM: 2, surface: 'concrete', firstImpact: 'lower-limb-feet', headImpact: false }, vitals: {}, findings: [], considerations: [] };
    const refused = await command(socket, 'case:submit', { clientId: randomUUID(), hospitalId: community, clinical });
    socket.close();
    expect(refused).toMatchObject({ ok: false, error: { field: 'hospitalId', message: 'hospitalId: is not a destination of your agency' } });
    const unknown = await admin.send('PUT', `/api/people/agencies/${agency}/destinations`, { hospitalIds: [general, 9999] });
    expect(unknown.status).toBe(400);
    expect((await unknown.json()).error.message).toBe('hospitalIds[1]: no hospital has the id 9999');
  });

  it("refuses an agency the admin is not a member of", async () => {
    const [other] = await server.db('agencies').insert({ name: 'Harrowdene Private Ambulance', created_at: Date.now() }).returning('id');
    expect((await admin.send('POST', `/api/people/agencies/${other.id}/units`, { callSign: 'HX 1' })).status).toBe(403);
    expect((await admin.send('PATCH', `/api/people/agencies/${other.id}`, { name: 'Mine now' })).status).toBe(403);
  });
});
