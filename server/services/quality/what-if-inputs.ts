import type { Knex } from 'knex';
import type { ClinicalInput } from '../../../shared/schemas/clinical';
import type { CriteriaSetId } from '../../../shared/triage/criteria';
import { LEVEL_IDS, type LevelId } from '../../../shared/triage/policy';

// The past cases a what-if evaluates again, read for speed. A what-if over a year of a busy
// hospital reads 100,000 cases; reading each one's latest pre-alert from case_revisions and
// parsing its JSON cost more than evaluating it. So:
// - one prepared statement reads only the few columns of `cases` and `outcomes` the figures
//   need, as arrays, through the connection Knex holds (statements are kept per connection,
//   see keepStatements in server/db.ts);
// - the evaluation input of each case's latest revision is kept here, parsed, under the case id
//   and the revision number. A revision never changes once written, so a kept input is true for
//   as long as the case's current_revision is the one it was kept under; a case revised since is
//   read again. Only the parts the engine reads are kept (not the handover's free text).
// The first what-if over a period reads and parses every input; the following ones (a draft
// tried, edited, tried again) read only the cases revised or added since.

/**
 * The past cases, newest first, column by column (one typed array per figure rather than an
 * object per case: 100,000 objects kept through a run cost more in garbage collection than in
 * reading). Levels are codes into LEVELS; NOT_DECIDED and NOT_KNOWN stand for null.
 */
export interface PastCases {
  n: number;
  id: Int32Array;
  createdAt: Float64Array;
  recommended: Uint8Array;
  decided: Uint8Array;
  hasOutcome: Uint8Array;
  /** −1 when not known. */
  iss: Int16Array;
  /** −1 not known, 0 no, 1 yes. */
  nfti: Int8Array;
  set: CriteriaSetId[];
  input: ClinicalInput[];
}
export const LEVELS: readonly LevelId[] = LEVEL_IDS;
const LEVEL_CODE: Record<string, number> = { full: 0, limited: 1, consult: 2, none: 3 };
export const NOT_DECIDED = 255;

interface Kept { revision: number; set: CriteriaSetId; input: ClinicalInput }

/**
 * About 0.7 kB of heap each (68 MB measured for 100,000): at most a busy hospital's year is kept,
 * about 85 MB. Two such hospitals tried in turn push each other's inputs out, and each what-if
 * then reads and parses again.
 */
export const KEPT_INPUTS_MAX = 120_000;
const keptInputs = new WeakMap<Knex, Map<number, Kept>>();
/** Ids per look-up of inputs not kept (well under SQLite's limit of bound parameters). */
const LOOKUP_CHUNK = 500;

interface Statement {
  raw(on: boolean): Statement;
  all(...params: unknown[]): unknown[][];
}
interface Connection { prepare(sql: string): Statement }

const SCAN = `SELECT c.id, c.current_revision, c.created_at, c.recommended_level, c.decided_level, o.case_id IS NOT NULL, o.iss, o.nfti_positive
  FROM cases c LEFT JOIN outcomes o ON o.case_id = c.id
  WHERE c.hospital_id = ? AND c.created_at >= ? AND c.created_at < ? AND c.state <> 'cancelled'
  ORDER BY c.created_at DESC, c.id DESC`;
const LOOKUP = `SELECT r.case_id, r.revision, r.criteria_set, r.input
  FROM cases c JOIN case_revisions r ON r.case_id = c.id AND r.revision = c.current_revision
  WHERE c.id IN (${Array.from({ length: LOOKUP_CHUNK }, () => '?').join(', ')})`;

/** What the engine reads of a stored input: the handover (free text, times) is left out. */
function evaluationInput(stored: ClinicalInput): ClinicalInput {
  const { handover: _handover, ...input } = stored;
  return input;
}

/** The cases of a hospital created in [start, end), not cancelled, newest first, each with the input of its latest revision. */
export async function readPastCases(db: Knex, hospitalId: number, start: number, end: number): Promise<PastCases> {
  let kept = keptInputs.get(db);
  if (!kept) keptInputs.set(db, (kept = new Map()));
  const conn = (await db.client.acquireConnection()) as Connection;
  try {
    // better-sqlite3 runs synchronously: nothing else uses the connection between these statements.
    const rows = conn.prepare(SCAN).raw(true).all(hospitalId, start, end);
    const missing: number[] = [];
    for (const row of rows) {
      if (kept.get(row[0] as number)?.revision !== row[1]) missing.push(row[0] as number);
    }
    if (missing.length) {
      const lookup = conn.prepare(LOOKUP).raw(true);
      for (let from = 0; from < missing.length; from += LOOKUP_CHUNK) {
        const ids = missing.slice(from, from + LOOKUP_CHUNK);
        while (ids.length < LOOKUP_CHUNK) ids.push(-1);
        for (const [caseId, revision, set, text] of lookup.all(...ids)) {
          kept.delete(caseId as number);
          kept.set(caseId as number, { revision: revision as number, set: set as CriteriaSetId, input: evaluationInput(JSON.parse(text as string)) });
        }
      }
    }
    const n = rows.length;
    const cases: PastCases = {
      n: 0, id: new Int32Array(n), createdAt: new Float64Array(n), recommended: new Uint8Array(n), decided: new Uint8Array(n),
      hasOutcome: new Uint8Array(n), iss: new Int16Array(n), nfti: new Int8Array(n), set: [], input: [],
    };
    for (const row of rows) {
      const one = kept.get(row[0] as number);
      // Deleted between the two reads (by another process).
      if (!one) continue;
      const i = cases.n++;
      cases.id[i] = row[0] as number;
      cases.createdAt[i] = Number(row[2]);
      cases.recommended[i] = LEVEL_CODE[row[3] as string] ?? 3;
      cases.decided[i] = row[4] == null ? NOT_DECIDED : LEVEL_CODE[row[4] as string] ?? NOT_DECIDED;
      cases.hasOutcome[i] = row[5] === 1 ? 1 : 0;
      cases.iss[i] = row[6] == null ? -1 : Number(row[6]);
      cases.nfti[i] = row[7] == null ? -1 : row[7] ? 1 : 0;
      cases.set.push(one.set);
      cases.input.push(one.input);
    }
    // The first kept first out, once this what-if has what it needs.
    for (const id of kept.keys()) {
      if (kept.size <= KEPT_INPUTS_MAX) break;
      kept.delete(id);
    }
    return cases;
  } finally {
    await db.client.releaseConnection(conn);
  }
}
