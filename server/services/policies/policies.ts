import type { Knex } from 'knex';
import { LRUCache } from 'lru-cache';
import type { Me, Role } from '../../../shared/roles';
import type { ApproveVersion, CreateDraft, LooseningWarning, PolicyStatus, PolicyVersionSummary, PublishVersion, SaveDraft } from '../../../shared/schemas/policies';
import { EXAMPLE_POLICY, Policy, validatePolicy } from '../../../shared/triage/policy';
import type { BoardLevel } from '../../../shared/schemas/board';
import { withLocalCriteria } from '../../../shared/triage/local-criteria';
import { looseningWarnings } from '../../../shared/triage/loosening';
import { rekeyLocalCriteria, settleDraftCriteria } from './local-criteria';
import { assertHospital, assertMay, roleFor } from '../../auth/guards';
import { AppError, conflict, forbidden, invalid, notFound } from '../../errors';
import { appendAudit, type Actor } from '../audit/audit';

// The engine compiles a policy once per object; keyed by the stored text, the same version
// stays the same object across evaluations. A region has a few dozen hospitals, each with one
// version in force and perhaps one waiting for its date: 200 leaves room for all of them [ours].
const publishedCache = new LRUCache<string, Policy>({ max: 200 });

/**
 * The policy that decides a new evaluation at this hospital now: its latest published version
 * whose effective date has come, or the shipped example until the hospital publishes its own.
 */
/**
 * The levels, with their names, of the policy version that evaluated a case: its names may differ
 * from today's. The one place a case's level names are looked up.
 */
export async function levelsOfCase(db: Knex, row: { hospital_id: number; policy_id: string; policy_version: number }, at: number): Promise<BoardLevel[]> {
  let policy: Policy | undefined;
  if (row.policy_id === EXAMPLE_POLICY.id && row.policy_version === EXAMPLE_POLICY.version) policy = EXAMPLE_POLICY;
  else {
    const stored = await db('policy_versions').where({ hospital_id: row.hospital_id, policy_id: row.policy_id, version: row.policy_version }).first('document');
    if (stored) policy = Policy.parse(JSON.parse(stored.document));
  }
  // A version no longer stored reads with the example's names, or else today's.
  policy ??= row.policy_id === EXAMPLE_POLICY.id ? EXAMPLE_POLICY : await policyInForce(db, row.hospital_id, at);
  return policy.levels.map((l) => ({ id: l.id, name: l.name }));
}

export async function policyInForce(db: Knex, hospitalId: number, at: number): Promise<Policy> {
  const row = await db('policy_versions')
    .where({ hospital_id: hospitalId, status: 'published' })
    .andWhere('effective_from', '<=', at)
    .orderBy([{ column: 'effective_from', order: 'desc' }, { column: 'version', order: 'desc' }])
    .first('document');
  if (!row) return EXAMPLE_POLICY;
  let policy = publishedCache.get(row.document);
  if (!policy) {
    policy = withLocalCriteria(Policy.parse(JSON.parse(row.document)));
    publishedCache.set(row.document, policy);
  }
  return policy;
}

// ---- The lifecycle: draft → approved (by a trauma lead) → published with an effective date.
// A published version stays `published` for good: policyInForce picks the latest whose date has
// come, so a version published for a future date never cuts short the one in force until then.
// `retired` is left for a later "withdraw" action; nothing sets it yet.

export interface PolicyVersionRow {
  id: number;
  hospital_id: number;
  policy_id: string;
  version: number;
  status: PolicyStatus;
  document: string;
  created_by: number | null;
  /** Who last changed the draft; null on versions from before this was kept (their author then). */
  changed_by: number | null;
  created_at: number;
  approved_by: number | null;
  approved_by_name: string | null;
  approved_at: number | null;
  published_by: number | null;
  published_at: number | null;
  effective_from: number | null;
  loosening_acknowledged: string | null;
}

export interface PolicyVersionDetail extends PolicyVersionSummary {
  document: Policy;
  /** Guarded criteria this version loosens against the policy in force now. */
  warnings: LooseningWarning[];
  /** The warnings the approver ticked as read; null when the approval had none (or not yet approved). */
  looseningAcknowledged: LooseningWarning[] | null;
}

/** How far in the past an effective date may be and still count as "now" (client clocks drift). */
const PAST_TOLERANCE_MS = 5 * 60_000;

const actorOf = (me: Me, role: Role): Actor => ({ id: me.user.id, role });
const refOf = (row: Pick<PolicyVersionRow, 'policy_id' | 'version'>) => ({ id: row.policy_id, version: row.version });

async function namesOf(db: Knex, ids: Array<number | null>): Promise<Map<number, string>> {
  const wanted = [...new Set(ids.filter((id): id is number => id != null))];
  if (!wanted.length) return new Map();
  const rows = await db('users').whereIn('id', wanted).select('id', 'name');
  return new Map(rows.map((row) => [row.id as number, row.name as string]));
}

async function inForceVersionId(db: Knex, hospitalId: number, at: number): Promise<number | null> {
  const row = await db('policy_versions')
    .where({ hospital_id: hospitalId, status: 'published' })
    .andWhere('effective_from', '<=', at)
    .orderBy([{ column: 'effective_from', order: 'desc' }, { column: 'version', order: 'desc' }])
    .first('id');
  return row?.id ?? null;
}

function summarise(row: PolicyVersionRow, names: Map<number, string>, inForceId: number | null): PolicyVersionSummary {
  const document = JSON.parse(row.document) as Policy;
  return {
    id: row.id,
    hospitalId: row.hospital_id,
    policyId: row.policy_id,
    version: row.version,
    status: row.status,
    name: document.name,
    createdBy: row.created_by == null ? null : names.get(row.created_by) ?? null,
    createdAt: Number(row.created_at),
    approvedByName: row.approved_by_name,
    approvedAt: row.approved_at == null ? null : Number(row.approved_at),
    publishedBy: row.published_by == null ? null : names.get(row.published_by) ?? null,
    publishedAt: row.published_at == null ? null : Number(row.published_at),
    effectiveFrom: row.effective_from == null ? null : Number(row.effective_from),
    inForce: row.id === inForceId,
  };
}

export interface HospitalPolicies {
  hospital: { id: number; name: string; heightUnit: 'm' | 'ft' | 'storeys' };
  /** What decides a new evaluation now; `example` is true until the hospital publishes its own. */
  inForce: { policyId: string; version: number; name: string; example: boolean; versionId: number | null };
  versions: PolicyVersionSummary[];
}

export async function listPolicyVersions(db: Knex, me: Me, hospitalId: number, at: number): Promise<HospitalPolicies> {
  assertHospital(me, hospitalId);
  const hospital = await db('hospitals').where({ id: hospitalId }).first('id', 'name', 'height_unit as heightUnit');
  if (!hospital) throw notFound('That hospital');
  const rows: PolicyVersionRow[] = await db('policy_versions').where({ hospital_id: hospitalId }).orderBy('version', 'desc');
  const names = await namesOf(db, rows.flatMap((row) => [row.created_by, row.published_by]));
  const inForceId = await inForceVersionId(db, hospitalId, at);
  const policy = await policyInForce(db, hospitalId, at);
  return {
    hospital,
    inForce: { policyId: policy.id, version: policy.version, name: policy.name, example: policy.example, versionId: inForceId },
    versions: rows.map((row) => summarise(row, names, inForceId)),
  };
}

/** One version with its document, for a hospital the person belongs to. */
async function loadVersion(db: Knex, me: Me, versionId: number): Promise<PolicyVersionRow> {
  const row: PolicyVersionRow | undefined = await db('policy_versions').where({ id: versionId }).first();
  if (!row) throw notFound('That policy version');
  assertHospital(me, row.hospital_id);
  return row;
}

export async function getPolicyVersion(db: Knex, me: Me, versionId: number, at: number): Promise<PolicyVersionDetail> {
  const row = await loadVersion(db, me, versionId);
  const names = await namesOf(db, [row.created_by, row.published_by]);
  const document = withLocalCriteria(JSON.parse(row.document) as Policy);
  return {
    ...summarise(row, names, await inForceVersionId(db, row.hospital_id, at)),
    document,
    warnings: looseningWarnings(document, await policyInForce(db, row.hospital_id, at)),
    looseningAcknowledged: row.loosening_acknowledged == null ? null : JSON.parse(row.loosening_acknowledged),
  };
}

const slug = (text: string) => text.toLowerCase().normalize('NFKD').replace(/[^a-z0-9]+/g, '-').replace(/^-+|-+$/g, '').slice(0, 40);

/** A hospital keeps one policy id for all its versions; a new one is made from its short name, unique across hospitals. */
async function policyIdFor(db: Knex, hospitalId: number): Promise<string> {
  const own = await db('policy_versions').where({ hospital_id: hospitalId }).orderBy('version', 'desc').first('policy_id');
  if (own) return own.policy_id;
  const hospital = await db('hospitals').where({ id: hospitalId }).first('short_name');
  const base = `${slug(hospital?.short_name ?? '') || 'hospital'}-activation`;
  const taken = await db('policy_versions').where({ policy_id: base }).whereNot({ hospital_id: hospitalId }).first('id');
  return taken || base === EXAMPLE_POLICY.id ? `${base}-${hospitalId}` : base;
}

function notEditable(row: PolicyVersionRow): AppError {
  return conflict(`Version ${row.version} is ${row.status} and can no longer be changed; start a new draft, which begins as a copy of it.`);
}

export async function createDraft(db: Knex, me: Me, request: CreateDraft, at: number): Promise<PolicyVersionDetail> {
  assertHospital(me, request.hospitalId);
  const id = await db.transaction(async (trx) => {
    const open = await trx('policy_versions').where({ hospital_id: request.hospitalId, status: 'draft' }).first('version');
    if (open) throw conflict(`Version ${open.version} is already a draft; edit or discard it before starting another.`);
    let source: Policy;
    if (request.from === 'example') source = EXAMPLE_POLICY;
    else if (request.from === 'in-force') source = await policyInForce(trx, request.hospitalId, at);
    else {
      const row = await loadVersion(trx, me, request.from);
      if (row.hospital_id !== request.hospitalId) throw forbidden('That version belongs to another hospital.');
      source = JSON.parse(row.document);
    }
    const policyId = await policyIdFor(trx, request.hospitalId);
    const last = await trx('policy_versions').where({ hospital_id: request.hospitalId, policy_id: policyId }).max({ v: 'version' }).first();
    const version = Number(last?.v ?? 0) + 1;
    const hospital = await trx('hospitals').where({ id: request.hospitalId }).first('name');
    const document: Policy = {
      ...rekeyLocalCriteria(structuredClone(source), policyId, version, hospital?.name ?? 'this hospital'),
      id: policyId,
      version,
      name: source.example ? 'Activation policy' : source.name,
      note: source.example ? 'Started from the shipped example; every level needs local review before approval.' : source.note,
      example: false,
      approvedBy: null,
      effectiveFrom: null,
    };
    const [inserted] = await trx('policy_versions')
      .insert({ hospital_id: request.hospitalId, policy_id: policyId, version, status: 'draft', document: JSON.stringify(document), created_by: me.user.id, changed_by: me.user.id, created_at: at })
      .returning('id');
    await appendAudit(trx, {
      at, actor: actorOf(me, roleFor(me, 'policies.draft')), action: 'policy.draft-created', entity: 'policy', entityId: inserted.id,
      after: { hospitalId: request.hospitalId, from: source.example ? 'example' : { id: source.id, version: source.version } },
      policy: { id: policyId, version },
    });
    return inserted.id as number;
  });
  return getPolicyVersion(db, me, id, at);
}

export async function saveDraft(db: Knex, me: Me, versionId: number, edit: SaveDraft, at: number): Promise<PolicyVersionDetail> {
  await db.transaction(async (trx) => {
    const row = await loadVersion(trx, me, versionId);
    if (row.status !== 'draft') throw notEditable(row);
    const before: Policy = JSON.parse(row.document);
    const hospital = await trx('hospitals').where({ id: row.hospital_id }).first('name');
    const local = settleDraftCriteria(edit, row.policy_id, row.version, hospital?.name ?? 'this hospital');
    const check = validatePolicy({ ...before, name: edit.name, note: edit.note, levels: edit.levels, rules: local.rules, localCriteria: local.localCriteria });
    if (!check.ok) throw invalid(check.issues);
    await trx('policy_versions').where({ id: versionId }).update({ document: JSON.stringify(check.policy), changed_by: me.user.id });
    await appendAudit(trx, {
      at, actor: actorOf(me, roleFor(me, 'policies.draft')), action: 'policy.draft-saved', entity: 'policy', entityId: versionId,
      before: { name: before.name, levels: before.levels, rules: before.rules, localCriteria: before.localCriteria ?? [] },
      after: { name: check.policy.name, levels: check.policy.levels, rules: check.policy.rules, localCriteria: check.policy.localCriteria ?? [] },
      policy: refOf(row),
    });
  });
  return getPolicyVersion(db, me, versionId, at);
}

export async function discardDraft(db: Knex, me: Me, versionId: number, at: number): Promise<void> {
  await db.transaction(async (trx) => {
    const row = await loadVersion(trx, me, versionId);
    if (row.status !== 'draft') throw notEditable(row);
    await trx('policy_versions').where({ id: versionId }).delete();
    await appendAudit(trx, { at, actor: actorOf(me, roleFor(me, 'policies.draft')), action: 'policy.draft-discarded', entity: 'policy', entityId: versionId, before: JSON.parse(row.document), policy: refOf(row) });
  });
}

/**
 * Only a trauma lead of the version's own hospital approves, and the approval names them. Two
 * people stand behind every version in force: its author and its last editor may not approve it.
 */
export async function approveVersion(db: Knex, me: Me, versionId: number, request: ApproveVersion, at: number): Promise<PolicyVersionDetail> {
  assertMay(me, 'policies.approve');
  await db.transaction(async (trx) => {
    const row = await loadVersion(trx, me, versionId);
    if (row.status !== 'draft') throw conflict(`Version ${row.version} is ${row.status}; only a draft can be approved.`);
    if (row.created_by === me.user.id || (row.changed_by ?? row.created_by) === me.user.id) {
      throw forbidden('You drafted or last changed this version; another trauma lead must approve it.');
    }
    // Saved drafts were checked, but the catalog may have changed since: check again before it can go live.
    const check = validatePolicy({ ...JSON.parse(row.document), approvedBy: me.user.name });
    if (!check.ok) throw invalid(check.issues);
    // A draft that loosens a guarded criterion is approved only by someone who ticks that they read each warning.
    const warnings = looseningWarnings(check.policy, await policyInForce(trx, row.hospital_id, at));
    if (warnings.length && !request.looseningAcknowledged) {
      throw invalid([{ field: 'looseningAcknowledged', message: `must be ticked: this version loosens ${warnings.length === 1 ? 'a guarded criterion' : `${warnings.length} guarded criteria`}: ${warnings.map((w) => w.label).join('; ')}` }]);
    }
    const acknowledged = warnings.length ? warnings : null;
    await trx('policy_versions')
      .where({ id: versionId })
      .update({
        status: 'approved', document: JSON.stringify(check.policy), approved_by: me.user.id, approved_by_name: me.user.name, approved_at: at,
        loosening_acknowledged: acknowledged && JSON.stringify(acknowledged),
      });
    await appendAudit(trx, {
      at, actor: actorOf(me, roleFor(me, 'policies.approve')), action: 'policy.approved', entity: 'policy', entityId: versionId,
      before: { status: 'draft' },
      after: { status: 'approved', approvedBy: me.user.name, approvedAt: at, looseningAcknowledged: acknowledged?.map((w) => w.message) ?? null },
      policy: refOf(row),
    });
  });
  return getPolicyVersion(db, me, versionId, at);
}

const isoDate = (ms: number) => new Date(ms).toISOString().slice(0, 10);

export async function publishVersion(db: Knex, me: Me, versionId: number, request: PublishVersion, at: number): Promise<PolicyVersionDetail> {
  const role = roleFor(me, 'policies.publish');
  const effectiveFrom = request.effectiveFrom ?? at;
  if (effectiveFrom < at - PAST_TOLERANCE_MS) {
    throw invalid([{ field: 'effectiveFrom', message: 'must not be in the past: cases already evaluated keep the version they were evaluated under' }]);
  }
  await db.transaction(async (trx) => {
    const row = await loadVersion(trx, me, versionId);
    if (row.status !== 'approved') {
      throw conflict(row.status === 'draft' ? `Version ${row.version} is a draft; a trauma lead must approve it before it is published.` : `Version ${row.version} is already ${row.status}.`);
    }
    const document: Policy = { ...JSON.parse(row.document), effectiveFrom: isoDate(effectiveFrom) };
    await trx('policy_versions')
      .where({ id: versionId })
      .update({ status: 'published', document: JSON.stringify(document), published_by: me.user.id, published_at: at, effective_from: effectiveFrom });
    await appendAudit(trx, {
      at, actor: actorOf(me, role), action: 'policy.published', entity: 'policy', entityId: versionId,
      before: { status: 'approved' }, after: { status: 'published', effectiveFrom }, policy: refOf(row),
    });
  });
  return getPolicyVersion(db, me, versionId, at);
}
