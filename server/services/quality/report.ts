import type { Knex } from 'knex';
import type { Me } from '../../../shared/roles';
import { MAJOR_TRAUMA_ISS_ABOVE, STANDARD_LABEL, cribariCellIndex, majorTraumaCode, rate, triageRates, wilsonInterval, type OutcomeStandard } from '../../../shared/quality';
import {
  HEIGHT_BANDS, heightBandOf,
  type Cell, type CriterionFigure, type Drilldown, type DrilldownCase, type DrilldownQuery, type HeightBandId,
  type Matrix, type MatrixGroup, type QualityReport, type ReportQuery, type Targets, type TargetsInput, type TargetStanding,
} from '../../../shared/schemas/quality';
import { findCriterion } from '../../../shared/triage/catalog';
import type { LevelId } from '../../../shared/triage/policy';
import { assertHospital, assertMay, roleFor } from '../../auth/guards';
import { notFound } from '../../errors';
import { toCsv, type CsvColumn } from './csv';
import { policyInForce } from '../policies/policies';
import { getSetting, setSetting } from '../people/settings';
import { periodOf, type Period } from '../../../shared/days';
import { selectRows } from '../../db';

// The over- and under-triage report: one indexed scan over the hospital's cases in the period,
// joined with their outcomes and the facts of their latest revision, grouped in SQLite and
// folded into the breakdowns in JS. The drill-down reads the same rows one by one.

export const TARGETS_KEY = 'quality.targets';
export const DEFAULT_TARGETS: Targets = {
  underTriageMax: 0.05, // [source: Mohan D et al., Arch Surg 2011]
  overTriageHospital: [0.25, 0.35], // [memory]
  overTriageSystemMax: 0.5, // [source: Mohan 2011]
};

export function assertQualityReader(me: Me, hospitalId: number): void {
  assertMay(me, 'quality.read');
  assertHospital(me, hospitalId);
}

export async function qualityTargets(db: Knex, hospitalId: number): Promise<Targets> {
  return { ...DEFAULT_TARGETS, ...(await getSetting<Partial<Targets>>(db, TARGETS_KEY, hospitalId, DEFAULT_TARGETS)) };
}

export async function saveQualityTargets(db: Knex, me: Me, hospitalId: number, targets: TargetsInput, at: number): Promise<Targets> {
  const role = roleFor(me, 'quality.manage');
  assertHospital(me, hospitalId);
  await setSetting(db, TARGETS_KEY, targets, hospitalId, { actor: { id: me.user.id, role }, at });
  return qualityTargets(db, hospitalId);
}

// ---- The scan --------------------------------------------------------------------------------------

/** The cases of the period, column by column; outcome columns are -1 / NaN where none is stored. */
interface Scan {
  n: number;
  id: Int32Array;
  createdAt: Float64Array;
  agencyId: Int32Array;
  recommended: Uint8Array;
  decided: Uint8Array; // 255 = undecided
  hasOutcome: Uint8Array;
  iss: Int16Array; // -1 = unknown
  nfti: Int8Array; // -1 unknown, 0 no, 1 yes
  heightM: Float64Array; // NaN = unknown
  criteria: string[];
  caseNumber: string[];
}

const LEVEL_CODE: Record<LevelId, number> = { none: 0, consult: 1, limited: 2, full: 3 };
const LEVEL_OF: LevelId[] = ['none', 'consult', 'limited', 'full'];
const UNDECIDED = 255;

async function scanCases(db: Knex, hospitalId: number, period: Period): Promise<Scan> {
  const rows: Array<Record<string, unknown>> = await db('cases as c')
    .leftJoin('outcomes as o', 'o.case_id', 'c.id')
    .leftJoin('case_quality_facts as f', 'f.case_id', 'c.id')
    .where('c.hospital_id', hospitalId)
    .andWhere('c.created_at', '>=', period.start)
    .andWhere('c.created_at', '<', period.end)
    .andWhereNot('c.state', 'cancelled')
    .orderBy('c.created_at')
    .select('c.id', 'c.case_number', 'c.created_at', 'c.agency_id', 'c.recommended_level', 'c.decided_level', 'o.case_id as outcome', 'o.iss', 'o.nfti_positive', 'f.height_m', 'f.criteria');
  const n = rows.length;
  const scan: Scan = {
    n,
    id: new Int32Array(n), createdAt: new Float64Array(n), agencyId: new Int32Array(n),
    recommended: new Uint8Array(n), decided: new Uint8Array(n), hasOutcome: new Uint8Array(n),
    iss: new Int16Array(n), nfti: new Int8Array(n), heightM: new Float64Array(n),
    criteria: new Array<string>(n), caseNumber: new Array<string>(n),
  };
  for (let i = 0; i < n; i++) {
    const r = rows[i];
    scan.id[i] = r.id as number;
    scan.caseNumber[i] = r.case_number as string;
    scan.createdAt[i] = Number(r.created_at);
    scan.agencyId[i] = r.agency_id as number;
    scan.recommended[i] = LEVEL_CODE[r.recommended_level as LevelId] ?? 0;
    scan.decided[i] = r.decided_level == null ? UNDECIDED : LEVEL_CODE[r.decided_level as LevelId] ?? UNDECIDED;
    scan.hasOutcome[i] = r.outcome == null ? 0 : 1;
    scan.iss[i] = r.iss == null ? -1 : (r.iss as number);
    scan.nfti[i] = r.nfti_positive == null ? -1 : r.nfti_positive ? 1 : 0;
    scan.heightM[i] = r.height_m == null ? NaN : (r.height_m as number);
    scan.criteria[i] = (r.criteria as string | null) ?? '';
  }
  return scan;
}

/** The Cribari cell (shared/quality's classification): 0 a, 1 b, 2 c, 3 d; 4 outcome cannot tell; 5 no outcome stored. */
function cellOf(full: boolean, major: number, hasOutcome: number): number {
  if (!hasOutcome) return 5;
  return cribariCellIndex(full, major);
}

const CELL_NAMES: Cell[] = ['a', 'b', 'c', 'd'];

function matrixOf(counts: ArrayLike<number>): Matrix {
  const base = triageRates(counts[0], counts[1], counts[2], counts[3]);
  return { ...base, excluded: counts[4] };
}

function standingUnder(m: Matrix, t: Targets): TargetStanding {
  if (!m.underTriageCI) return 'no-data';
  if (m.underTriageCI[1] < t.underTriageMax) return 'meets';
  if (m.underTriageCI[0] >= t.underTriageMax) return 'misses';
  return 'uncertain';
}

function standingOver(m: Matrix, t: Targets): TargetStanding {
  if (!m.overTriageCI) return 'no-data';
  const [lo, hi] = t.overTriageHospital;
  if (m.overTriageCI[0] >= lo && m.overTriageCI[1] <= hi) return 'meets';
  if (m.overTriageCI[0] > hi || m.overTriageCI[1] < lo) return 'misses';
  return 'uncertain';
}

const SET_WORDS: Record<string, string> = { 'field-2021': '2021 guideline', 'field-2011': '2011 guideline', policy: 'policy condition' };
export function criterionLabel(id: string): string {
  const entry = findCriterion(id);
  return entry ? `${entry.label} (${SET_WORDS[entry.set] ?? entry.set})` : id;
}

async function hospitalOf(db: Knex, hospitalId: number) {
  const hospital = await db('hospitals').where({ id: hospitalId }).first('id', 'name');
  if (!hospital) throw notFound('That hospital');
  return hospital as { id: number; name: string };
}

/** The report for one hospital, period and outcome standard. */
export async function qualityReport(db: Knex, me: Me, query: ReportQuery, at: number): Promise<QualityReport> {
  assertQualityReader(me, query.hospitalId);
  return buildReport(db, query, at);
}

const AGENCY_SPAN = 1 << 20;
/** Outcome codes: stored or not × ISS band × NFTI band (see groupCases). */
const OUTCOME_SPAN = 18;
/** An ISS standing for its band, for shared/quality's classification: not known, not major, major. */
const ISS_OF_BAND = [-1, MAJOR_TRAUMA_ISS_ABOVE, MAJOR_TRAUMA_ISS_ABOVE + 1];
const LEVEL_SQL = (col: string) => `(CASE ${col} WHEN 'none' THEN 0 WHEN 'consult' THEN 1 WHEN 'limited' THEN 2 WHEN 'full' THEN 3 ELSE 4 END)`;

/**
 * The cases of the period counted in SQLite, grouped by everything the breakdowns need (month,
 * agency, height band, both levels, outcome classes, fired criteria): a few thousand groups at
 * most, whatever the number of cases. The grouping key is packed into one integer because
 * SQLite sorts one integer far faster than eight columns.
 */
async function groupCases(db: Knex, hospitalId: number, period: Period): Promise<GroupRow[]> {
  const bounds = period.months.slice(1).map((m) => m.start);
  const month = bounds.length ? `(CASE ${bounds.map((_, i) => `WHEN c.created_at < ? THEN ${i}`).join(' ')} ELSE ${bounds.length} END)` : '0';
  const band = `(CASE WHEN f.height_m IS NULL THEN ${HEIGHT_BANDS.length} ${HEIGHT_BANDS.slice(0, -1).map((b, i) => `WHEN f.height_m <= ${b.upToM} THEN ${i}`).join(' ')} ELSE ${HEIGHT_BANDS.length - 1} END)`;
  // The outcome for shared/quality to classify (SQL only filters and counts): whether one is
  // stored, the ISS split at shared/quality's threshold (0 not known, 1 at or below, 2 above),
  // and the NFTI (0 not known, 1 no, 2 yes). Grouping by the ISS itself made ~50 times the groups.
  const outcome = `((CASE WHEN o.case_id IS NULL THEN 0 ELSE 1 END) * 9 + (CASE WHEN o.iss IS NULL THEN 0 WHEN o.iss > ${MAJOR_TRAUMA_ISS_ABOVE} THEN 2 ELSE 1 END) * 3 + (CASE WHEN o.nfti_positive IS NULL THEN 0 WHEN o.nfti_positive THEN 2 ELSE 1 END))`;
  const key = `((((CAST(${month} AS BIGINT) * ${AGENCY_SPAN} + c.agency_id) * 8 + ${band}) * 5 + ${LEVEL_SQL('c.decided_level')}) * 5 + ${LEVEL_SQL('c.recommended_level')}) * ${OUTCOME_SPAN} + ${outcome}`;
  const rows = await selectRows<{ k: number; criteria: string | null; n: number }>(
    db,
    `SELECT ${key} AS k, f.criteria AS criteria, COUNT(*) AS n
     FROM cases c LEFT JOIN outcomes o ON o.case_id = c.id LEFT JOIN case_quality_facts f ON f.case_id = c.id
     WHERE c.hospital_id = ? AND c.created_at >= ? AND c.created_at < ? AND c.state <> 'cancelled'
     GROUP BY 1, 2`,
    [...bounds, hospitalId, period.start, period.end],
  );
  return rows.map(({ k, criteria, n }) => {
    const o = k % OUTCOME_SPAN;
    let rest = Math.floor(k / OUTCOME_SPAN);
    const rec = rest % 5;
    rest = Math.floor(rest / 5);
    const dec = rest % 5;
    rest = Math.floor(rest / 5);
    const bandIndex = rest % 8;
    rest = Math.floor(rest / 8);
    return {
      month: Math.floor(rest / AGENCY_SPAN), agency: rest % AGENCY_SPAN, band: bandIndex,
      dec: dec === 4 ? null : LEVEL_OF[dec], rec: LEVEL_OF[rec] ?? 'none',
      has_o: Math.floor(o / 9), iss: ISS_OF_BAND[Math.floor(o / 3) % 3], nfti: (o % 3) - 1,
      criteria: criteria ?? '', n: Number(n),
    };
  });
}

/** iss −1 and nfti −1 when not known. */
interface GroupRow { month: number; agency: number; band: number; dec: LevelId | null; rec: LevelId; has_o: number; iss: number; nfti: number; criteria: string; n: number }

/** The report without the caller check, for the benchmark and the services that already checked. */
export async function buildReport(db: Knex, query: ReportQuery, at: number): Promise<QualityReport> {
  const started = performance.now();
  const hospital = await hospitalOf(db, query.hospitalId);
  const period = periodOf(query.from, query.to, query.timeZone);
  const groups = await groupCases(db, query.hospitalId, period);
  const targets = await qualityTargets(db, query.hospitalId);
  const inForce = await policyInForce(db, query.hospitalId, at);
  const { standard, basis } = query;

  const overall = new Int32Array(6);
  const recommendedCells = new Int32Array(6);
  const monthCells = period.months.map(() => new Int32Array(6));
  const bandCells = [...HEIGHT_BANDS, null].map(() => new Int32Array(6));
  const agencyCells = new Map<number, Int32Array>();
  const crit = new Map<string, Int32Array>(); // fired, major, in b, in c
  let undecided = 0;
  let cases = 0;
  const levelOf = (g: GroupRow) => (basis === 'decided' && g.dec ? g.dec : g.rec);

  for (const g of groups) {
    const n = g.n;
    cases += n;
    const major = majorTraumaCode(g.iss, g.nfti, standard);
    const cell = cellOf(levelOf(g) === 'full', major, g.has_o);
    if (g.has_o && !g.dec) undecided += n;
    overall[cell] += n;
    recommendedCells[cellOf(g.rec === 'full', major, g.has_o)] += n;
    monthCells[g.month][cell] += n;
    bandCells[g.band][cell] += n;
    let agency = agencyCells.get(g.agency);
    if (!agency) agencyCells.set(g.agency, (agency = new Int32Array(6)));
    agency[cell] += n;
    // A criterion's figures count cases whose outcome tells under the standard.
    if (cell >= 4 || g.criteria === '') continue;
    for (const id of g.criteria.split(' ')) {
      let c = crit.get(id);
      if (!c) crit.set(id, (c = new Int32Array(4)));
      c[0] += n;
      if (major === 1) c[1] += n;
      if (cell === 1) c[2] += n;
      else if (cell === 2) c[3] += n;
    }
  }

  const agencyNames = new Map<number, string>(
    agencyCells.size ? (await db('agencies').whereIn('id', [...agencyCells.keys()]).select('id', 'name')).map((a) => [a.id as number, a.name as string]) : [],
  );
  const group = (key: string, label: string, counts: Int32Array): MatrixGroup => ({ key, label, ...matrixOf(counts) });
  const matrix = matrixOf(overall);
  const criteria: CriterionFigure[] = [...crit.entries()]
    .map(([id, c]) => ({ id, label: criterionLabel(id), fired: c[0], major: c[1], ppv: rate(c[1], c[0]), ppvCI: wilsonInterval(c[1], c[0]), inOverTriaged: c[2], inUnderTriaged: c[3] }))
    .sort((x, y) => y.fired - x.fired || x.label.localeCompare(y.label));

  return {
    query,
    hospital,
    levels: inForce.levels.map((l) => ({ id: l.id, name: l.name })),
    generatedAt: at,
    cases,
    withOutcome: cases - overall[5],
    undecided,
    matrix,
    recommendedMatrix: matrixOf(recommendedCells),
    targets,
    standing: { underTriage: standingUnder(matrix, targets), overTriage: standingOver(matrix, targets) },
    months: period.months.map((m, i) => group(m.key, m.key, monthCells[i])),
    agencies: [...agencyCells.entries()].map(([id, counts]) => group(String(id), agencyNames.get(id) ?? `Agency ${id}`, counts)).sort((x, y) => x.label.localeCompare(y.label)),
    heightBands: [...HEIGHT_BANDS.map((b) => ({ id: b.id as HeightBandId, label: b.label })), { id: 'unknown' as HeightBandId, label: 'Height not recorded' }]
      .map((b, i) => group(b.id, b.label, bandCells[i]))
      .filter((g) => g.key !== 'unknown' || g.a + g.b + g.c + g.d + g.excluded > 0),
    criteria,
    ms: Math.round(performance.now() - started),
  };
}

const DRILLDOWN_LIMIT = 500;

/** The cases behind one number of the report, with the same filters and the same counting. */
export async function drilldown(db: Knex, me: Me, query: DrilldownQuery): Promise<Drilldown> {
  assertQualityReader(me, query.hospitalId);
  const period = periodOf(query.from, query.to, query.timeZone);
  const scan = await scanCases(db, query.hospitalId, period);
  const monthIndex = query.month ? period.months.findIndex((m) => m.key === query.month) : -1;
  const monthStart = monthIndex >= 0 ? period.months[monthIndex].start : -Infinity;
  const monthEnd = monthIndex >= 0 ? (period.months[monthIndex + 1]?.start ?? period.end) : Infinity;
  if (query.month && monthIndex < 0) return { total: 0, cases: [], limited: false };
  const agencyNames = new Map<number, string>((await db('agencies').select('id', 'name')).map((a) => [a.id as number, a.name as string]));
  const picked: DrilldownCase[] = [];
  let total = 0;
  for (let i = scan.n - 1; i >= 0; i--) {
    if (scan.createdAt[i] < monthStart || scan.createdAt[i] >= monthEnd) continue;
    if (query.agencyId && scan.agencyId[i] !== query.agencyId) continue;
    const heightM = Number.isNaN(scan.heightM[i]) ? null : scan.heightM[i];
    if (query.band && heightBandOf(heightM) !== query.band) continue;
    const criteria = scan.criteria[i] === '' ? [] : scan.criteria[i].split(' ');
    if (query.criterion && !criteria.includes(query.criterion)) continue;
    const decided = scan.decided[i];
    const level = query.basis === 'decided' && decided !== UNDECIDED ? decided : scan.recommended[i];
    const cell = cellOf(level === 3, majorTraumaCode(scan.iss[i], scan.nfti[i], query.standard), scan.hasOutcome[i]);
    if (query.cell === 'no-outcome' ? cell !== 5 : query.cell !== 'all' ? CELL_NAMES[cell] !== query.cell : false) continue;
    // A criterion's figures count cases with a known outcome only; so does its drill-down.
    if (query.criterion && cell >= 4) continue;
    total++;
    if (picked.length >= DRILLDOWN_LIMIT) continue;
    picked.push({
      id: scan.id[i],
      caseNumber: scan.caseNumber[i],
      createdAt: scan.createdAt[i],
      agency: agencyNames.get(scan.agencyId[i]) ?? `Agency ${scan.agencyId[i]}`,
      heightM,
      recommendedLevel: LEVEL_OF[scan.recommended[i]],
      decidedLevel: decided === UNDECIDED ? null : LEVEL_OF[decided],
      iss: scan.iss[i] < 0 ? null : scan.iss[i],
      nftiPositive: scan.nfti[i] < 0 ? null : scan.nfti[i] === 1,
      cell: cell < 4 ? CELL_NAMES[cell] : null,
      criteria,
    });
  }
  return { total, cases: picked, limited: total > picked.length };
}

// ---- Export ------------------------------------------------------------------------------------

interface CsvLine { section: string; group: string; m?: Matrix; fired?: number; major?: number; ppv?: number | null; ppvLo?: number; ppvHi?: number; note?: string }

const pct = (v: number | null | undefined) => (v == null ? '' : Math.round(v * 1000) / 10);

/** The report as one flat table a spreadsheet can filter: one line per figure group. */
export function reportCsv(report: QualityReport): string {
  const q = report.query;
  const lines: CsvLine[] = [
    { section: 'report', group: report.hospital.name, note: `${q.from} to ${q.to} (${q.timeZone}); outcome ${STANDARD_LABEL[q.standard]}; activation = ${q.basis === 'decided' ? 'decided level (recommended when undecided)' : 'recommended level'}; full activation counts as activation; generated ${new Date(report.generatedAt).toISOString()}` },
    { section: 'report', group: 'cases', note: `${report.cases} cases, ${report.withOutcome} with an outcome, ${report.undecided} without a recorded decision` },
    { section: 'targets', group: 'under-triage', note: `below ${pct(report.targets.underTriageMax)} % [source: Mohan 2011]` },
    { section: 'targets', group: 'over-triage', note: `${pct(report.targets.overTriageHospital[0])}–${pct(report.targets.overTriageHospital[1])} % hospital level [memory]; below ${pct(report.targets.overTriageSystemMax)} % system level [source: Mohan 2011]` },
    { section: 'overall', group: 'decided', m: report.matrix },
    { section: 'overall', group: 'recommended', m: report.recommendedMatrix },
    ...report.months.map((g) => ({ section: 'month', group: g.label, m: g })),
    ...report.agencies.map((g) => ({ section: 'agency', group: g.label, m: g })),
    ...report.heightBands.map((g) => ({ section: 'fall height', group: g.label, m: g })),
    ...report.criteria.map((c) => ({ section: 'criterion', group: c.label, fired: c.fired, major: c.major, ppv: c.ppv, ppvLo: c.ppvCI?.[0], ppvHi: c.ppvCI?.[1], note: `in over-triaged ${c.inOverTriaged}; in under-triaged ${c.inUnderTriaged}` })),
  ];
  const columns: Array<CsvColumn<CsvLine>> = [
    { header: 'section', value: (l) => l.section },
    { header: 'group', value: (l) => l.group },
    { header: 'a', value: (l) => l.m?.a },
    { header: 'b', value: (l) => l.m?.b },
    { header: 'c', value: (l) => l.m?.c },
    { header: 'd', value: (l) => l.m?.d },
    { header: 'outcome_unknown', value: (l) => l.m?.excluded },
    { header: 'over_triage_pct', value: (l) => pct(l.m?.overTriage) },
    { header: 'over_triage_95_low', value: (l) => pct(l.m?.overTriageCI?.[0]) },
    { header: 'over_triage_95_high', value: (l) => pct(l.m?.overTriageCI?.[1]) },
    { header: 'under_triage_pct', value: (l) => pct(l.m?.underTriage) },
    { header: 'under_triage_95_low', value: (l) => pct(l.m?.underTriageCI?.[0]) },
    { header: 'under_triage_95_high', value: (l) => pct(l.m?.underTriageCI?.[1]) },
    { header: 'over_triage_1_minus_specificity_pct', value: (l) => pct(l.m?.sensitivityDefinition.overTriage) },
    { header: 'under_triage_1_minus_sensitivity_pct', value: (l) => pct(l.m?.sensitivityDefinition.underTriage) },
    { header: 'fired', value: (l) => l.fired },
    { header: 'major', value: (l) => l.major },
    { header: 'ppv_pct', value: (l) => pct(l.ppv) },
    { header: 'ppv_95_low', value: (l) => pct(l.ppvLo) },
    { header: 'ppv_95_high', value: (l) => pct(l.ppvHi) },
    { header: 'note', value: (l) => l.note },
  ];
  return toCsv(lines, columns);
}
