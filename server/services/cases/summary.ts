// A case as the screens show it (CaseSummary): built from the row, its names and its revisions,
// listed in the shared urgency order, and kept as JSON text for the many reloads of one list.
import type { Knex } from 'knex';
import { LRUCache } from 'lru-cache';
import { OPEN_STATES, type CaseState, type CaseSummary } from '../../../shared/schemas/cases';
import type { ClinicalInput } from '../../../shared/schemas/clinical';
import type { Evaluation } from '../../../shared/triage/evaluate';
import { compareUrgency, type UrgencyFacts } from '../../../shared/board/urgency';
import { notFound } from '../../errors';
import { num, type CaseRow } from './queries';

export interface CaseFilter {
  hospitalIds?: number[];
  agencyIds?: number[];
  states?: readonly CaseState[];
  ids?: number[];
  /** At most this many, the most urgent first (open lists) or the newest first (history). */
  limit?: number;
  /** The time the urgency order is read at (a case long past its ETA sinks); now when absent. */
  now?: number;
}

/** The longest list one answer carries; past it the answer says how many it leaves out [ours]. */
export const LIST_CAP = 500;

const URGENCY_COLUMNS = ['c.id', 'c.state', 'c.acknowledged_at', 'c.level_rose', 'c.overdue_at', 'c.decided_level', 'c.recommended_level', 'c.eta_at', 'c.created_at', 'c.arrived_at'];
type UrgencyRow = Pick<CaseRow, 'id' | 'state' | 'acknowledged_at' | 'level_rose' | 'overdue_at' | 'decided_level' | 'recommended_level' | 'eta_at' | 'created_at' | 'arrived_at'>;
const urgencyOfRow = (r: UrgencyRow): UrgencyFacts => ({
  id: r.id, state: r.state, acknowledgedAt: num(r.acknowledged_at), levelRose: Boolean(r.level_rose), overdueAt: num(r.overdue_at),
  decidedLevel: r.decided_level, recommendedLevel: r.recommended_level, etaAt: num(r.eta_at), createdAt: Number(r.created_at), arrivedAt: num(r.arrived_at),
});
const openOnly = (filter: CaseFilter) => !!filter.states && filter.states.every((s) => OPEN_STATES.includes(s));

/**
 * The rows a filter selects, in the shared urgency order for open lists (all of them read, so a
 * flood never pushes an urgent case past the cap) or newest first for history, cut at the cap;
 * with how many matched in all, so nothing is left out without saying so.
 */
async function orderedRows<T extends UrgencyRow>(db: Knex, filter: CaseFilter, select: (q: Knex.QueryBuilder) => Knex.QueryBuilder): Promise<{ rows: T[]; total: number }> {
  const cap = filter.limit ?? LIST_CAP;
  if (openOnly(filter) || filter.ids) {
    const rows = (await select(filteredCases(db, filter))) as T[];
    const now = filter.now ?? Date.now();
    const facts = new Map(rows.map((r) => [r.id, urgencyOfRow(r)]));
    rows.sort((a, b) => compareUrgency(facts.get(a.id)!, facts.get(b.id)!, now));
    return { rows: rows.slice(0, cap), total: rows.length };
  }
  const rows = (await select(filteredCases(db, filter)).orderBy([{ column: 'c.created_at', order: 'desc' }, { column: 'c.id', order: 'desc' }]).limit(cap)) as T[];
  const total = rows.length < cap ? rows.length : Number((await filteredCases(db, filter).count({ n: '*' }).first())?.n ?? rows.length);
  return { rows, total };
}

export interface ParsedRevision { input: ClinicalInput; result: Evaluation }

// Parsed input and evaluation of recent revisions, per database. A revision row is never changed
// once written, so an entry cannot go stale; without it every board's reload after a restart or
// a dropped link parsed each open case's JSON again (250 open cases: about a third of the
// listing's time), all while the live pre-alerts waited behind it. Only committed rows go in,
// so a transaction that rolls back cannot leave a revision that never was. The least recently
// used goes first: the open cases a board reloads were written or read most recently.
const REVISION_CACHE_SIZE = 2000;
const revisionCaches = new WeakMap<Knex, LRUCache<string, ParsedRevision>>();
const revisionKey = (caseId: number, revision: number) => `${caseId}:${revision}`;

function revisionCacheOf(db: Knex): LRUCache<string, ParsedRevision> | null {
  if (db.isTransaction) return null;
  let cache = revisionCaches.get(db);
  if (!cache) revisionCaches.set(db, (cache = new LRUCache({ max: REVISION_CACHE_SIZE })));
  return cache;
}

/** After a revision's transaction commits: the summary announced next finds it parsed exactly as it will read back. */
export function rememberRevision(db: Knex, caseId: number, revision: number, parsed: ParsedRevision): void {
  revisionCacheOf(db)?.set(revisionKey(caseId, revision), parsed);
}

/** The parsed JSON of these revisions, reading from the table only those not in the cache. */
async function parsedRevisions(db: Knex, wanted: Array<[caseId: number, revision: number]>): Promise<Map<string, ParsedRevision>> {
  const cache = revisionCacheOf(db);
  const found = new Map<string, ParsedRevision>();
  const missing: Array<[number, number]> = [];
  for (const [caseId, revision] of wanted) {
    const key = revisionKey(caseId, revision);
    const hit = cache?.get(key);
    if (hit) found.set(key, hit);
    else missing.push([caseId, revision]);
  }
  for (let i = 0; i < missing.length; i += 400) {
    const rows = await db('case_revisions').whereIn(['case_id', 'revision'], missing.slice(i, i + 400)).select('case_id', 'revision', 'input', 'result');
    for (const row of rows) {
      const key = revisionKey(row.case_id, row.revision);
      const parsed = { input: JSON.parse(row.input) as ClinicalInput, result: JSON.parse(row.result) as Evaluation };
      found.set(key, parsed);
      cache?.set(key, parsed);
    }
  }
  return found;
}

/** The cases a filter selects, with the names a summary shows joined in; orderedRows orders and cuts. */
function filteredCases(db: Knex, filter: CaseFilter): Knex.QueryBuilder {
  const query = db('cases as c')
    .join('hospitals as h', 'h.id', 'c.hospital_id')
    .join('agencies as a', 'a.id', 'c.agency_id')
    .leftJoin('units as u', 'u.id', 'c.unit_id')
    .leftJoin('users as ack', 'ack.id', 'c.acknowledged_by')
    .leftJoin('users as dec', 'dec.id', 'c.decided_by');
  if (filter.ids) query.whereIn('c.id', filter.ids);
  if (filter.states) query.whereIn('c.state', filter.states as CaseState[]);
  if (filter.hospitalIds || filter.agencyIds) {
    query.where((w) => {
      if (filter.hospitalIds) w.orWhereIn('c.hospital_id', filter.hospitalIds);
      if (filter.agencyIds) w.orWhereIn('c.agency_id', filter.agencyIds);
    });
  }
  return query;
}

type ListedRow = CaseRow & {
  hospital_name: string; height_unit: CaseSummary['hospital']['heightUnit']; agency_name: string;
  /** Null only when unit_id is, and then no unit is shown. */
  call_sign: string;
  acknowledged_by_name: string | null; decided_by_name: string | null;
};

/** Case summaries in the urgency order (history: newest first), in three queries whatever the count (two once the revisions are cached). */
export async function listCaseSummaries(db: Knex, filter: CaseFilter): Promise<CaseSummary[]> {
  const { rows } = await orderedRows<ListedRow>(db, filter, (q) => q.select('c.*', 'h.name as hospital_name', 'h.height_unit', 'a.name as agency_name', 'u.call_sign', 'ack.name as acknowledged_by_name', 'dec.name as decided_by_name'));
  if (!rows.length) return [];
  const ids = rows.map((r) => r.id as number);
  const revisions = await db('case_revisions as r')
    .join('cases as c', function () {
      this.on('c.id', '=', 'r.case_id').andOn(function () {
        this.on('r.revision', '=', 'c.current_revision').orOn('r.revision', '=', db.raw('1'));
      });
    })
    .leftJoin('users as by', 'by.id', 'r.created_by')
    .whereIn('r.case_id', ids)
    .select('r.case_id', 'r.revision', 'r.eta_minutes', 'r.notes', 'r.created_at', 'by.name as created_by_name', 'c.current_revision');
  const parsed = await parsedRevisions(db, revisions.map((r) => [r.case_id as number, r.revision as number]));
  const latest = new Map<number, (typeof revisions)[number]>();
  const first = new Map<number, (typeof revisions)[number]>();
  for (const rev of revisions) {
    if (rev.revision === rev.current_revision) latest.set(rev.case_id, rev);
    if (rev.revision === 1) first.set(rev.case_id, rev);
  }
  return rows.map((row) => {
    const rev = latest.get(row.id)!;
    const { input, result } = parsed.get(revisionKey(row.id, rev.revision))!;
    const firstRev = first.get(row.id) ?? rev;
    const firstInput = parsed.get(revisionKey(row.id, firstRev.revision))!.input;
    return {
      id: row.id,
      caseNumber: row.case_number,
      clientId: row.client_id,
      state: row.state,
      hospital: { id: row.hospital_id, name: row.hospital_name, heightUnit: row.height_unit },
      agency: { id: row.agency_id, name: row.agency_name },
      unit: row.unit_id == null ? null : { id: row.unit_id, callSign: row.call_sign },
      createdAt: Number(row.created_at),
      updatedAt: Number(row.updated_at),
      etaAt: num(row.eta_at),
      revision: row.current_revision,
      latest: { revision: rev.revision, input, result, etaMinutes: rev.eta_minutes, notes: rev.notes, createdAt: Number(rev.created_at), createdBy: rev.created_by_name },
      firstVitals: firstInput.vitals ?? null,
      fieldRisk: row.field_risk,
      recommendedLevel: row.recommended_level,
      levelRose: Boolean(row.level_rose),
      decidedLevel: row.decided_level,
      decidedReason: row.decided_reason,
      decidedAt: num(row.decided_at),
      decidedBy: row.decided_by_name ?? null,
      acknowledgedAt: num(row.acknowledged_at),
      acknowledgedBy: row.acknowledged_by_name ?? null,
      bay: row.bay,
      pagedAt: num(row.paged_at),
      arrivedAt: num(row.arrived_at),
      teamAtBedsideAt: num(row.team_at_bedside_at),
      closedAt: num(row.closed_at),
      cancelledAt: num(row.cancelled_at),
      cancelReason: row.cancel_reason,
      overdueAt: num(row.overdue_at),
      policy: { id: row.policy_id, version: row.policy_version, example: result.policy.example },
      source: row.source ?? null,
      rowVersion: row.row_version,
    } satisfies CaseSummary;
  });
}

export async function caseSummary(db: Knex, caseId: number): Promise<CaseSummary> {
  const [summary] = await listCaseSummaries(db, { ids: [caseId] });
  if (!summary) throw notFound('That case');
  return summary;
}

// A board or crew screen reloads its open cases after every connection that did not recover
// (a restart, a dropped link), and every screen of one hospital asks for the same list at about
// the same moment. Each case's summary is kept here as JSON text, under a key made of everything
// it shows that can change: the case row's row_version (every change to a case bumps it) and the
// names joined into it (a renamed nurse, unit or hospital shows at once). A reload reads the keys
// of the cases in view in one indexed query of a few columns, builds only the summaries whose key
// moved, and joins the kept texts. The key is read from the database each time, so the cache
// stays true with several server processes on one database. Revisions never change once written.
// Four times the longest list one reload reads (500): a region's open cases, about 3 kB each.
const SUMMARY_TEXT_CACHE_SIZE = 2000;
const summaryTexts = new WeakMap<Knex, LRUCache<number, { key: string; text: string }>>();

interface SummaryKeyRow extends UrgencyRow {
  id: number; row_version: number; hospital_name: string; height_unit: string; agency_name: string;
  call_sign: string | null; ack_name: string | null; dec_name: string | null; by_name: string | null;
}
const summaryKeyOf = (r: SummaryKeyRow) => [r.row_version, r.hospital_name, r.height_unit, r.agency_name, r.call_sign, r.ack_name, r.dec_name, r.by_name].join('\u0000');

/** The same cases as `listCaseSummaries`, in the same order, as one JSON array's text. */
export async function listCaseSummariesJson(db: Knex, filter: CaseFilter): Promise<string> {
  return `[${(await caseSummaryTexts(db, filter)).texts.join(',')}]`;
}

/** As listCaseSummariesJson, with how many cases matched in all (more than listed when the cap cut the list). */
export async function listCaseSummariesPage(db: Knex, filter: CaseFilter): Promise<{ json: string; total: number; listed: number }> {
  const { texts, total } = await caseSummaryTexts(db, filter);
  return { json: `[${texts.join(',')}]`, total, listed: texts.length };
}

/** The same cases as `listCaseSummaries`, in the same order, each as its JSON text. */
async function caseSummaryTexts(db: Knex, filter: CaseFilter): Promise<{ texts: string[]; total: number }> {
  if (db.isTransaction) {
    const all = await listCaseSummaries(db, { ...filter, limit: undefined });
    const cap = filter.limit ?? LIST_CAP;
    return { texts: all.slice(0, cap).map((summary) => JSON.stringify(summary)), total: all.length };
  }
  let cache = summaryTexts.get(db);
  if (!cache) summaryTexts.set(db, (cache = new LRUCache({ max: SUMMARY_TEXT_CACHE_SIZE })));
  const { rows: keyRows, total } = await orderedRows<SummaryKeyRow>(db, filter, (q) =>
    q
      .leftJoin('case_revisions as r', function () {
        this.on('r.case_id', '=', 'c.id').andOn('r.revision', '=', 'c.current_revision');
      })
      .leftJoin('users as by', 'by.id', 'r.created_by')
      .select(...URGENCY_COLUMNS, 'c.row_version', 'h.name as hospital_name', 'h.height_unit', 'a.name as agency_name', 'u.call_sign', 'ack.name as ack_name', 'dec.name as dec_name', 'by.name as by_name'),
  );
  const keys = keyRows.map(summaryKeyOf);
  const texts = keyRows.map((row, i) => {
    const kept = cache.get(row.id);
    return kept?.key === keys[i] ? kept.text : undefined;
  });
  const stale = keyRows.filter((_, i) => texts[i] === undefined).map((row) => row.id);
  if (stale.length) {
    const at = new Map(keyRows.map((row, i) => [row.id, i]));
    for (const summary of await listCaseSummaries(db, { ids: stale, limit: stale.length })) {
      const i = at.get(summary.id)!;
      texts[i] = JSON.stringify(summary);
      // Changed between the two reads: served as it is now, and not kept under the older key.
      if (summary.rowVersion !== keyRows[i].row_version) continue;
      cache.set(summary.id, { key: keys[i], text: texts[i]! });
    }
  }
  return { texts: texts.filter((text) => text !== undefined), total };
}

/**
 * Fills the kept summary texts with every hospital's open cases, as a server starts: the boards
 * and crews that reconnect after a restart then read them instead of building them while the
 * first pre-alerts wait. Answers how many cases it read.
 */
export async function primeCaseLists(db: Knex): Promise<number> {
  const hospitals = (await db('cases').whereIn('state', OPEN_STATES).distinct('hospital_id')) as Array<{ hospital_id: number }>;
  let cases = 0;
  for (const { hospital_id } of hospitals) cases += (await caseSummaryTexts(db, { hospitalIds: [hospital_id], states: OPEN_STATES })).texts.length;
  return cases;
}
