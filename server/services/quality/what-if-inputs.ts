import type { Knex } from 'knex';
import type { ClinicalInput } from '../../../shared/schemas/clinical';
import type { CriteriaSetId } from '../../../shared/triage/criteria';
import { LEVEL_IDS, type LevelId } from '../../../shared/triage/policy';
import { evaluationInputReader } from '../cases/evaluation-input';

// The past cases a what-if evaluates again. A year of a busy hospital is 100,000 cases; reading
// each one's latest revision (its input and result as JSON, a few kB) and parsing it took longer
// than evaluating it twice. So one query reads, per case, only the columns the figures need from
// `cases` and `outcomes` and the engine's input, compact, from `case_evaluation_inputs`, which
// every revision writes (server/services/cases/evaluation-input.ts). Nothing is kept between
// what-ifs: any process sharing the database answers the first one as fast as the next.

/**
 * The past cases, newest first, column by column (one typed array per figure rather than an
 * object per case: 100,000 objects kept through a run cost more in garbage collection than in
 * reading). Levels are codes into LEVELS; NOT_DECIDED stands for null.
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
  /**
   * The i-th case's criteria set and input, read on demand; the object returned may be filled
   * again by the next call, so evaluate it before asking for another.
   */
  inputAt(i: number): { set: CriteriaSetId; input: ClinicalInput };
}
export const LEVELS: readonly LevelId[] = LEVEL_IDS;
const LEVEL_CODE: Record<string, number> = { full: 0, limited: 1, consult: 2, none: 3 };
export const NOT_DECIDED = 255;
/** Ids per look-up of revisions read whole (well under any database's limit of bound parameters). */
const LOOKUP_CHUNK = 500;

/**
 * The latest input of cases whose narrow row is missing or behind (written by a version of the
 * product before the table, or by a process still running one): read from the revision itself.
 */
async function revisionInputs(db: Knex, ids: number[]): Promise<Map<number, { set: CriteriaSetId; input: ClinicalInput }>> {
  const found = new Map<number, { set: CriteriaSetId; input: ClinicalInput }>();
  for (let from = 0; from < ids.length; from += LOOKUP_CHUNK) {
    const rows = await db('cases as c')
      .join('case_revisions as r', function () {
        this.on('r.case_id', '=', 'c.id').andOn('r.revision', '=', 'c.current_revision');
      })
      .whereIn('c.id', ids.slice(from, from + LOOKUP_CHUNK))
      .select('c.id', 'r.criteria_set', 'r.input');
    for (const row of rows) found.set(row.id, { set: row.criteria_set, input: JSON.parse(row.input) as ClinicalInput });
  }
  return found;
}

/** The cases of a hospital created in [start, end), not cancelled, newest first, each with the input of its latest revision. */
export async function readPastCases(db: Knex, hospitalId: number, start: number, end: number): Promise<PastCases> {
  const rows: Record<string, unknown>[] = await db('cases as c')
    .leftJoin('case_evaluation_inputs as e', function () {
      this.on('e.case_id', '=', 'c.id').andOn('e.revision', '=', 'c.current_revision');
    })
    .leftJoin('outcomes as o', 'o.case_id', 'c.id')
    .where('c.hospital_id', hospitalId)
    .andWhere('c.created_at', '>=', start)
    .andWhere('c.created_at', '<', end)
    .andWhereNot('c.state', 'cancelled')
    .orderBy([{ column: 'c.created_at', order: 'desc' }, { column: 'c.id', order: 'desc' }])
    .select(
      'c.id', 'c.created_at', 'c.recommended_level', 'c.decided_level', 'o.case_id as outcome_of', 'o.iss', 'o.nfti_positive',
      'e.numbers', 'e.words',
    );
  const behind = rows.filter((row) => row.words == null).map((row) => row.id as number);
  const whole = behind.length ? await revisionInputs(db, behind) : null;

  const n = rows.length;
  const numbers: string[] = [];
  const words: string[] = [];
  const ids = new Int32Array(n);
  const cases: PastCases = {
    n: 0, id: ids, createdAt: new Float64Array(n), recommended: new Uint8Array(n), decided: new Uint8Array(n),
    hasOutcome: new Uint8Array(n), iss: new Int16Array(n), nfti: new Int8Array(n),
    inputAt: (i) => (words[i] === '' ? whole!.get(ids[i])! : stored(numbers[i], words[i])),
  };
  const stored = evaluationInputReader();
  for (const row of rows) {
    const id = row.id as number;
    // Deleted between the two reads (by another process).
    if (row.words == null && !whole?.has(id)) continue;
    const i = cases.n++;
    cases.id[i] = id;
    cases.createdAt[i] = Number(row.created_at);
    cases.recommended[i] = LEVEL_CODE[row.recommended_level as string] ?? 3;
    cases.decided[i] = row.decided_level == null ? NOT_DECIDED : LEVEL_CODE[row.decided_level as string] ?? NOT_DECIDED;
    cases.hasOutcome[i] = row.outcome_of == null ? 0 : 1;
    cases.iss[i] = row.iss == null ? -1 : Number(row.iss);
    cases.nfti[i] = row.nfti_positive == null ? -1 : row.nfti_positive ? 1 : 0;
    numbers.push((row.numbers as string | null) ?? '');
    words.push((row.words as string | null) ?? '');
  }
  return cases;
}
