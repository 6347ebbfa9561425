import type { Knex } from 'knex';
import { isUniqueViolation } from '../../db';
import type { Me, Role } from '../../../shared/roles';
import {
  NOTIFICATION_LISTS,
  type AgencyFields,
  type AgencyRow,
  type CreateUser,
  type EscalationLaterStep,
  type HospitalFields,
  type HospitalRow,
  type NotificationLists,
  type PersonRow,
  type PlaceRef,
  type UpdateHospital,
  type UpdateUnit,
  type UpdateUser,
} from '../../../shared/schemas/people';
import { agencyIdsOf, assertAgency, assertHospital, hospitalIdsOf, roleFor } from '../../auth/guards';
import { endSessionsOf } from '../../auth/session';
import { endIdentitySessionsOf } from '../../idp/store';
import { hashPassword } from '../../auth/passwords';
import { conflict, forbidden, invalid, notFound } from '../../errors';
import { appendAudit, type Actor } from '../audit/audit';
import { getSetting, setSetting } from './settings';
import { membershipsOf, rolesOf } from './users';

// People & places, scoped to the administrator's own hospitals and agencies: an admin sees the
// people who share one of their places, changes only those whose every place is theirs, and
// changes only those places' records.

const actorOf = (me: Me): Actor => ({ id: me.user.id, role: roleFor(me, 'people.manage') });

function scopeOf(me: Me) {
  return { hospitals: new Set(hospitalIdsOf(me)), agencies: new Set(agencyIdsOf(me)) };
}

function assertPlaces(me: Me, places: PlaceRef[]): void {
  const scope = scopeOf(me);
  places.forEach((place, i) => {
    const mine = place.kind === 'hospital' ? scope.hospitals.has(place.id) : scope.agencies.has(place.id);
    if (!mine) throw invalid([{ field: `memberships[${i}]`, message: `that ${place.kind === 'hospital' ? 'hospital' : 'agency'} is not one of yours` }]);
  });
}

// ---- People

async function describePerson(db: Knex, row: { id: number; email: string; name: string; active: number | boolean }): Promise<PersonRow> {
  return { id: row.id, email: row.email, name: row.name, active: Boolean(row.active), roles: await rolesOf(db, row.id), memberships: await membershipsOf(db, row.id) };
}

export async function listPeople(db: Knex, me: Me): Promise<PersonRow[]> {
  const scope = scopeOf(me);
  const rows = await db('users as u')
    .whereExists((q) =>
      q.select(db.raw('1')).from('memberships as m').whereRaw('m.user_id = u.id')
        .andWhere((w) => w.whereIn('m.hospital_id', [...scope.hospitals]).orWhereIn('m.agency_id', [...scope.agencies])),
    )
    .orderBy('u.name')
    .select('u.id', 'u.email', 'u.name', 'u.active');
  return Promise.all(rows.map((row) => describePerson(db, row)));
}

/**
 * The person, if every one of their places is one of the admin's own. Sharing one place is not
 * enough: a hospital's administrator must not reset, rename or deactivate someone who also works
 * for places they do not manage, such as the county-wide administrator.
 */
async function loadPerson(db: Knex, me: Me, userId: number): Promise<PersonRow> {
  const row = await db('users').where({ id: userId }).first('id', 'email', 'name', 'active');
  if (!row) throw notFound('That person');
  const person = await describePerson(db, row);
  const scope = scopeOf(me);
  const inScope = (m: PlaceRef) => (m.kind === 'hospital' ? scope.hospitals : scope.agencies).has(m.id);
  if (!person.memberships.some(inScope)) throw forbidden('That person is not in one of your hospitals or agencies.');
  if (!person.memberships.every(inScope)) throw forbidden('That person also works for a hospital or agency you do not manage; an administrator of all their places must make this change.');
  return person;
}

const sameSet = <T>(a: T[], b: T[]) => new Set(a).size === new Set(b).size && a.every((x) => b.includes(x));

/** Nobody grants themselves a role or a place: the change needs a second administrator. */
function assertNotOwnAccess(me: Me, userId: number, before: PersonRow, request: UpdateUser): void {
  if (userId !== me.user.id) return;
  if (request.roles && !sameSet(request.roles, before.roles)) {
    throw forbidden('You cannot change your own roles; ask another administrator.');
  }
  if (request.memberships && !sameSet(request.memberships.map(placeKey), before.memberships.map(placeKey))) {
    throw forbidden('You cannot change your own hospitals or agencies; ask another administrator.');
  }
}

const membershipRow = (userId: number, place: PlaceRef) => ({ user_id: userId, hospital_id: place.kind === 'hospital' ? place.id : null, agency_id: place.kind === 'agency' ? place.id : null });
const unique = <T>(items: T[], key: (item: T) => string) => [...new Map(items.map((item) => [key(item), item])).values()];
const placeKey = (place: PlaceRef) => `${place.kind}:${place.id}`;

async function emailTaken(db: Knex, email: string, exceptId?: number): Promise<boolean> {
  const q = db('users').whereRaw('lower(email) = ?', [email.toLowerCase()]);
  if (exceptId) q.whereNot({ id: exceptId });
  return Boolean(await q.first('id'));
}

export async function createPerson(db: Knex, me: Me, request: CreateUser, at: number): Promise<PersonRow> {
  assertPlaces(me, request.memberships);
  const id = await db.transaction(async (trx) => {
    if (await emailTaken(trx, request.email)) throw conflict(`An account for ${request.email} already exists.`);
    // No password: with an outside issuer there is none, and the built-in provider's demo
    // accounts are the only ones that sign in with one.
    const [user] = await trx('users').insert({ email: request.email, name: request.name, password_hash: null, active: true, created_at: at }).returning('id');
    await trx('user_roles').insert([...new Set(request.roles)].map((role) => ({ user_id: user.id, role })));
    await trx('memberships').insert(unique(request.memberships, placeKey).map((place) => membershipRow(user.id, place)));
    await appendAudit(trx, { at, actor: actorOf(me), action: 'user.created', entity: 'user', entityId: user.id, after: request });
    return user.id as number;
  });
  return describePerson(db, (await db('users').where({ id }).first())!);
}

/**
 * Sets the person's password for the built-in sign-in; the audit row records that it changed,
 * never the value. Every session they hold ends with it, here and at the built-in identity
 * provider, so whoever knew the old password is signed out; the caller disconnects their sockets.
 */
export async function setPassword(db: Knex, me: Me, userId: number, password: string, at: number): Promise<PersonRow> {
  const passwordHash = await hashPassword(password);
  await db.transaction(async (trx) => {
    await loadPerson(trx, me, userId);
    await trx('users').where({ id: userId }).update({ password_hash: passwordHash });
    const sessionsEnded = await endSessionsOf(trx, userId);
    const identitySessionsEnded = await endIdentitySessionsOf(trx, userId);
    await appendAudit(trx, { at, actor: actorOf(me), action: 'user.password-set', entity: 'user', entityId: userId, after: { passwordSet: true, sessionsEnded, identitySessionsEnded } });
  });
  return describePerson(db, (await db('users').where({ id: userId }).first('id', 'email', 'name', 'active'))!);
}

export async function updatePerson(db: Knex, me: Me, userId: number, request: UpdateUser, at: number): Promise<PersonRow> {
  if (request.memberships) assertPlaces(me, request.memberships);
  await db.transaction(async (trx) => {
    const before = await loadPerson(trx, me, userId);
    assertNotOwnAccess(me, userId, before, request);
    if (request.email && (await emailTaken(trx, request.email, userId))) throw conflict(`An account for ${request.email} already exists.`);
    const fields: Record<string, string> = {};
    if (request.email) fields.email = request.email;
    if (request.name) fields.name = request.name;
    if (Object.keys(fields).length) await trx('users').where({ id: userId }).update(fields);
    if (request.roles) {
      await trx('user_roles').where({ user_id: userId }).delete();
      await trx('user_roles').insert([...new Set<Role>(request.roles)].map((role) => ({ user_id: userId, role })));
    }
    if (request.memberships) {
      // Only the admin's own places change; a membership elsewhere is another admin's to manage.
      const scope = scopeOf(me);
      await trx('memberships')
        .where({ user_id: userId })
        .andWhere((w) => w.whereIn('hospital_id', [...scope.hospitals]).orWhereIn('agency_id', [...scope.agencies]))
        .delete();
      const wanted = unique(request.memberships, placeKey);
      if (wanted.length) await trx('memberships').insert(wanted.map((place) => membershipRow(userId, place)));
      const left = await trx('memberships').where({ user_id: userId }).count({ n: '*' }).first();
      if (Number(left?.n) === 0) throw invalid([{ field: 'memberships', message: 'must name at least one hospital or agency' }]);
    }
    const after = await describePerson(trx, (await trx('users').where({ id: userId }).first())!);
    await appendAudit(trx, { at, actor: actorOf(me), action: 'user.updated', entity: 'user', entityId: userId, before, after });
  });
  return describePerson(db, (await db('users').where({ id: userId }).first())!);
}

/** Deactivating ends every session the person holds; the caller disconnects their sockets once this commits. */
export async function setPersonActive(db: Knex, me: Me, userId: number, active: boolean, at: number): Promise<PersonRow> {
  if (!active && userId === me.user.id) throw conflict('You cannot deactivate your own account.');
  await db.transaction(async (trx) => {
    const before = await loadPerson(trx, me, userId);
    if (before.active === active) return;
    await trx('users').where({ id: userId }).update({ active });
    const sessionsEnded = active ? 0 : await endSessionsOf(trx, userId);
    // The built-in provider's own session too: otherwise its next sign-in skips the password page.
    const identitySessionsEnded = active ? 0 : await endIdentitySessionsOf(trx, userId);
    await appendAudit(trx, {
      at, actor: actorOf(me), action: active ? 'user.reactivated' : 'user.deactivated', entity: 'user', entityId: userId,
      before: { active: before.active }, after: active ? { active } : { active, sessionsEnded, identitySessionsEnded },
    });
  });
  return loadPerson(db, me, userId);
}

// ---- Hospitals

interface HospitalDbRow { id: number; name: string; short_name: string; trauma_level: string; height_unit: string; escalation_minutes: number }

async function describeHospital(db: Knex, row: HospitalDbRow): Promise<HospitalRow> {
  const entries = await db('notification_lists').where({ hospital_id: row.id }).orderBy('email').select('list', 'email');
  const lists = Object.fromEntries(NOTIFICATION_LISTS.map((list) => [list, entries.filter((e) => e.list === list).map((e) => e.email as string)])) as NotificationLists;
  return {
    id: row.id, name: row.name, shortName: row.short_name, traumaLevel: row.trauma_level as HospitalRow['traumaLevel'],
    heightUnit: row.height_unit as HospitalRow['heightUnit'], escalationMinutes: row.escalation_minutes, lists,
    timeZone: await getSetting<string>(db, 'hospital.timeZone', row.id),
    escalationLaterSteps: await getSetting<EscalationLaterStep[]>(db, 'escalation.laterSteps', row.id),
  };
}

export async function listHospitals(db: Knex, me: Me): Promise<HospitalRow[]> {
  const rows: HospitalDbRow[] = await db('hospitals').whereIn('id', hospitalIdsOf(me)).orderBy('name');
  return Promise.all(rows.map((row) => describeHospital(db, row)));
}

async function writeLists(db: Knex, hospitalId: number, lists: NotificationLists): Promise<void> {
  await db('notification_lists').where({ hospital_id: hospitalId }).delete();
  const rows = NOTIFICATION_LISTS.flatMap((list) => unique(lists[list].map((email) => email.toLowerCase()), (e) => e).map((email) => ({ hospital_id: hospitalId, list, email })));
  if (rows.length) await db('notification_lists').insert(rows);
}

const hospitalColumns = (fields: Partial<HospitalFields>) => {
  const out: Record<string, unknown> = {};
  if (fields.name !== undefined) out.name = fields.name;
  if (fields.shortName !== undefined) out.short_name = fields.shortName;
  if (fields.traumaLevel !== undefined) out.trauma_level = fields.traumaLevel;
  if (fields.heightUnit !== undefined) out.height_unit = fields.heightUnit;
  if (fields.escalationMinutes !== undefined) out.escalation_minutes = fields.escalationMinutes;
  return out;
};

/** The time zone and later escalation steps live in settings; audited with the hospital's change. */
async function writeHospitalSettings(trx: Knex, hospitalId: number, fields: Partial<HospitalFields>): Promise<void> {
  if (fields.timeZone !== undefined) await setSetting(trx, 'hospital.timeZone', fields.timeZone, hospitalId);
  if (fields.escalationLaterSteps !== undefined) await setSetting(trx, 'escalation.laterSteps', fields.escalationLaterSteps, hospitalId);
}

export async function createHospital(db: Knex, me: Me, fields: HospitalFields, at: number): Promise<HospitalRow> {
  const id = await db.transaction(async (trx) => {
    let inserted;
    try {
      [inserted] = await trx('hospitals').insert({ ...hospitalColumns(fields), created_at: at }).returning('id');
    } catch (err) {
      if (isUniqueViolation(err)) throw conflict(`A hospital named ${fields.name} already exists.`);
      throw err;
    }
    await writeLists(trx, inserted.id, fields.lists);
    await writeHospitalSettings(trx, inserted.id, fields);
    // The admin who adds a hospital manages it.
    await trx('memberships').insert({ user_id: me.user.id, hospital_id: inserted.id, agency_id: null });
    await appendAudit(trx, { at, actor: actorOf(me), action: 'hospital.created', entity: 'hospital', entityId: inserted.id, after: fields });
    return inserted.id as number;
  });
  return describeHospital(db, await db('hospitals').where({ id }).first());
}

export async function updateHospital(db: Knex, me: Me, hospitalId: number, fields: UpdateHospital, at: number): Promise<HospitalRow> {
  assertHospital(me, hospitalId);
  await db.transaction(async (trx) => {
    const row = await trx('hospitals').where({ id: hospitalId }).first();
    if (!row) throw notFound('That hospital');
    const before = await describeHospital(trx, row);
    const columns = hospitalColumns(fields);
    try {
      if (Object.keys(columns).length) await trx('hospitals').where({ id: hospitalId }).update(columns);
    } catch (err) {
      if (isUniqueViolation(err)) throw conflict(`A hospital named ${fields.name} already exists.`);
      throw err;
    }
    if (fields.lists) await writeLists(trx, hospitalId, fields.lists);
    await writeHospitalSettings(trx, hospitalId, fields);
    const after = await describeHospital(trx, await trx('hospitals').where({ id: hospitalId }).first());
    await appendAudit(trx, { at, actor: actorOf(me), action: 'hospital.updated', entity: 'hospital', entityId: hospitalId, before, after });
  });
  return describeHospital(db, await db('hospitals').where({ id: hospitalId }).first());
}

// ---- Ambulance agencies, their units and where they take patients

async function describeAgency(db: Knex, row: { id: number; name: string }): Promise<AgencyRow> {
  const units = await db('units').where({ agency_id: row.id }).orderBy('call_sign').select('id', 'call_sign', 'active');
  const destinations = await db('agency_hospitals').where({ agency_id: row.id }).orderBy('hospital_id').pluck('hospital_id');
  return { id: row.id, name: row.name, units: units.map((u) => ({ id: u.id, callSign: u.call_sign, active: Boolean(u.active) })), destinations };
}

export interface AgencyListing {
  agencies: AgencyRow[];
  /** Every hospital an agency may send to, by name; destinations are not limited to the admin's own hospitals. */
  hospitals: Array<{ id: number; name: string }>;
}

export async function listAgencies(db: Knex, me: Me): Promise<AgencyListing> {
  const rows = await db('agencies').whereIn('id', agencyIdsOf(me)).orderBy('name').select('id', 'name');
  return { agencies: await Promise.all(rows.map((row) => describeAgency(db, row))), hospitals: await db('hospitals').orderBy('name').select('id', 'name') };
}

async function loadAgency(db: Knex, me: Me, agencyId: number): Promise<AgencyRow> {
  assertAgency(me, agencyId);
  const row = await db('agencies').where({ id: agencyId }).first('id', 'name');
  if (!row) throw notFound('That ambulance agency');
  return describeAgency(db, row);
}

export async function createAgency(db: Knex, me: Me, fields: AgencyFields, at: number): Promise<AgencyRow> {
  const id = await db.transaction(async (trx) => {
    let inserted;
    try {
      [inserted] = await trx('agencies').insert({ name: fields.name, created_at: at }).returning('id');
    } catch (err) {
      if (isUniqueViolation(err)) throw conflict(`An agency named ${fields.name} already exists.`);
      throw err;
    }
    await trx('memberships').insert({ user_id: me.user.id, hospital_id: null, agency_id: inserted.id });
    await appendAudit(trx, { at, actor: actorOf(me), action: 'agency.created', entity: 'agency', entityId: inserted.id, after: fields });
    return inserted.id as number;
  });
  return describeAgency(db, (await db('agencies').where({ id }).first('id', 'name'))!);
}

export async function updateAgency(db: Knex, me: Me, agencyId: number, fields: AgencyFields, at: number): Promise<AgencyRow> {
  await db.transaction(async (trx) => {
    const before = await loadAgency(trx, me, agencyId);
    try {
      await trx('agencies').where({ id: agencyId }).update({ name: fields.name });
    } catch (err) {
      if (isUniqueViolation(err)) throw conflict(`An agency named ${fields.name} already exists.`);
      throw err;
    }
    await appendAudit(trx, { at, actor: actorOf(me), action: 'agency.updated', entity: 'agency', entityId: agencyId, before: { name: before.name }, after: fields });
  });
  return loadAgency(db, me, agencyId);
}

export async function addUnit(db: Knex, me: Me, agencyId: number, callSign: string, at: number): Promise<AgencyRow> {
  await db.transaction(async (trx) => {
    await loadAgency(trx, me, agencyId);
    let inserted;
    try {
      [inserted] = await trx('units').insert({ agency_id: agencyId, call_sign: callSign, active: true }).returning('id');
    } catch (err) {
      if (isUniqueViolation(err)) throw conflict(`This agency already has a unit called ${callSign}.`);
      throw err;
    }
    await appendAudit(trx, { at, actor: actorOf(me), action: 'unit.created', entity: 'unit', entityId: inserted.id, after: { agencyId, callSign } });
  });
  return loadAgency(db, me, agencyId);
}

export async function updateUnit(db: Knex, me: Me, unitId: number, fields: UpdateUnit, at: number): Promise<AgencyRow> {
  const unit = await db('units').where({ id: unitId }).first();
  if (!unit) throw notFound('That unit');
  await db.transaction(async (trx) => {
    await loadAgency(trx, me, unit.agency_id);
    const columns: Record<string, unknown> = {};
    if (fields.callSign !== undefined) columns.call_sign = fields.callSign;
    if (fields.active !== undefined) columns.active = fields.active;
    try {
      if (Object.keys(columns).length) await trx('units').where({ id: unitId }).update(columns);
    } catch (err) {
      if (isUniqueViolation(err)) throw conflict(`This agency already has a unit called ${fields.callSign}.`);
      throw err;
    }
    await appendAudit(trx, {
      at, actor: actorOf(me), action: 'unit.updated', entity: 'unit', entityId: unitId,
      before: { callSign: unit.call_sign, active: Boolean(unit.active) }, after: fields,
    });
  });
  return loadAgency(db, me, unit.agency_id);
}

export async function setDestinations(db: Knex, me: Me, agencyId: number, hospitalIds: number[], at: number): Promise<AgencyRow> {
  const wanted = [...new Set(hospitalIds)].sort((a, b) => a - b);
  await db.transaction(async (trx) => {
    const before = await loadAgency(trx, me, agencyId);
    const known: number[] = await trx('hospitals').whereIn('id', wanted).pluck('id');
    const missing = wanted.findIndex((id) => !known.includes(id));
    if (missing >= 0) throw invalid([{ field: `hospitalIds[${hospitalIds.indexOf(wanted[missing])}]`, message: `no hospital has the id ${wanted[missing]}` }]);
    await trx('agency_hospitals').where({ agency_id: agencyId }).delete();
    if (wanted.length) await trx('agency_hospitals').insert(wanted.map((hospital_id) => ({ agency_id: agencyId, hospital_id })));
    await appendAudit(trx, { at, actor: actorOf(me), action: 'agency.destinations-set', entity: 'agency', entityId: agencyId, before: { hospitalIds: before.destinations }, after: { hospitalIds: wanted } });
  });
  return loadAgency(db, me, agencyId);
}

/** Demo: invented pager addresses for both demo hospitals, so paging has somewhere to go. */
export async function seedNotificationLists(db: Knex, ids: { hospitals: { general: number; community: number } }): Promise<void> {
  const lists: Array<[number, string, string[]]> = [
    [ids.hospitals.general, 'full', ['trauma-full@alderwick-general.plumbline.test', 'theatre-coordinator@alderwick-general.plumbline.test']],
    [ids.hospitals.general, 'limited', ['trauma-limited@alderwick-general.plumbline.test']],
    [ids.hospitals.general, 'consult', ['trauma-consult@alderwick-general.plumbline.test']],
    [ids.hospitals.general, 'escalation', ['ed-nurse-in-charge@alderwick-general.plumbline.test']],
    [ids.hospitals.general, 'senior', ['ed-consultant-on-call@alderwick-general.plumbline.test']],
    [ids.hospitals.community, 'full', ['resus-team@fenmoor-community.plumbline.test']],
    [ids.hospitals.community, 'limited', ['resus-team@fenmoor-community.plumbline.test']],
    [ids.hospitals.community, 'consult', ['ed-senior@fenmoor-community.plumbline.test']],
    [ids.hospitals.community, 'escalation', ['ed-senior@fenmoor-community.plumbline.test']],
    [ids.hospitals.community, 'senior', ['ed-consultant-on-call@fenmoor-community.plumbline.test']],
  ];
  await db('notification_lists').insert(lists.flatMap(([hospital_id, list, emails]) => emails.map((email) => ({ hospital_id, list, email }))));
}
