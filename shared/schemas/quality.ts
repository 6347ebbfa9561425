import { z } from 'zod';
import { ReaderTimeZone } from '../days';
import { boundedDate, spanIssue, withinMaxSpan } from './dates';
import type { Interval, OutcomeStandard } from '../quality';
import { ISS_REGIONS, type IssRegion } from '../quality/iss';
import type { LevelId } from '../triage/policy';

// Requests and answers of the Triage quality screen: the registry outcome import, the over- and
// under-triage report with its breakdowns and drill-down, the what-if run and the targets.

// ---- The registry CSV -------------------------------------------------------------------------

/** Where the patient went from the ED or hospital, as the registry records it [ours: the list]. */
export const DISPOSITIONS = ['home', 'ward', 'icu', 'operating-room', 'interventional-radiology', 'transferred', 'died', 'other'] as const;
export type Disposition = (typeof DISPOSITIONS)[number];
export const DISPOSITION_LABEL: Readonly<Record<Disposition, string>> = {
  home: 'Discharged home',
  ward: 'Admitted to a ward',
  icu: 'Admitted to intensive care',
  'operating-room': 'To the operating room',
  'interventional-radiology': 'To interventional radiology',
  transferred: 'Transferred to another hospital',
  died: 'Died',
  other: 'Other',
};

/** One AIS column per ISS body region; a cell lists the AIS severities of that region's injuries. */
export const AIS_COLUMNS: Readonly<Record<IssRegion, string>> = {
  'head-neck': 'ais_head_neck',
  face: 'ais_face',
  chest: 'ais_chest',
  abdomen: 'ais_abdomen',
  extremities: 'ais_extremities',
  external: 'ais_external',
};

export interface OutcomeColumn {
  name: string;
  meaning: string;
  example: string;
}

/** The columns the import reads, in the template's order. Only case_number is always required. */
export const OUTCOME_COLUMNS: readonly OutcomeColumn[] = [
  { name: 'case_number', meaning: 'The case number Plumbline gave the pre-alert, e.g. P26-00012', example: 'P26-00012' },
  { name: 'iss', meaning: 'Injury Severity Score 0–75; leave empty when the AIS columns are filled', example: '' },
  { name: 'niss', meaning: 'New Injury Severity Score 0–75 (optional)', example: '' },
  ...ISS_REGIONS.map((region) => ({
    name: AIS_COLUMNS[region],
    meaning: `AIS severities (1–6) of the ${region} injuries, separated by spaces; empty = no injury there`,
    example: region === 'chest' ? '3 2' : region === 'extremities' ? '3' : '',
  })),
  { name: 'red_cells_4h', meaning: 'Red cells given within 4 h of arrival: yes or no', example: 'no' },
  { name: 'minutes_to_or', meaning: 'Minutes from ED arrival to the operating room; none = no operation', example: 'none' },
  { name: 'minutes_to_ir', meaning: 'Minutes from ED arrival to interventional radiology; none = not done', example: 'none' },
  { name: 'icu_days', meaning: 'Days in intensive care after admission from the ED; none = no ICU stay', example: '4' },
  { name: 'hours_to_ventilation', meaning: 'Hours from ED arrival to mechanical ventilation not for a procedure; none = not ventilated', example: 'none' },
  { name: 'hours_to_death', meaning: 'Hours from ED arrival to death; none = survived', example: 'none' },
  { name: 'nfti', meaning: 'NFTI result yes or no, when the registry gives it instead of the fields above', example: '' },
  { name: 'disposition', meaning: `Where the patient went: ${DISPOSITIONS.join(', ')}`, example: 'icu' },
];
export const OUTCOME_COLUMN_NAMES = OUTCOME_COLUMNS.map((c) => c.name);

/** Upload limits [ours]: a month of a busy centre's registry is a few hundred rows. */
export const OUTCOME_FILE_MAX_BYTES = 2 * 1024 * 1024;
export const OUTCOME_FILE_MAX_ROWS = 20_000;

/** What one valid CSV row becomes. A time field: undefined = not recorded, null = did not happen. */
export interface OutcomeRecord {
  caseNumber: string;
  iss: number | null;
  niss: number | null;
  ais: Array<{ region: IssRegion; ais: number }> | null;
  redCellsWithin4h: boolean | null;
  minutesToOperatingRoom: number | null | undefined;
  minutesToInterventionalRadiology: number | null | undefined;
  icuDays: number | null | undefined;
  hoursToVentilation: number | null | undefined;
  hoursToDeath: number | null | undefined;
  /** The NFTI yes/no column as given. */
  nftiGiven: boolean | null;
  /** The NFTI result: from the fields when they tell, else the yes/no column. */
  nftiPositive: boolean | null;
  disposition: Disposition | null;
}

/** One problem in the file: its row as a spreadsheet numbers it (the header is row 1) and column. */
export interface ImportIssue {
  row: number;
  column: string | null;
  message: string;
}

export interface PreviewRow {
  row: number;
  /** As written in the file, so a row with problems can still be found in it. */
  caseNumber: string;
  caseId: number | null;
  record: OutcomeRecord | null;
  /** new: no outcome stored yet; update: replaces the stored outcome; null when the row has errors. */
  action: 'new' | 'update' | null;
  warnings: string[];
}

export interface ImportPreview {
  /** Present only when the file has no errors: confirm with it within `expiresAt`. */
  token: string | null;
  expiresAt: number | null;
  fileName: string;
  hospitalId: number;
  rows: PreviewRow[];
  errors: ImportIssue[];
  counts: { rows: number; valid: number; new: number; update: number; errors: number };
}

export interface ImportResult {
  batch: string;
  saved: number;
  created: number;
  updated: number;
}

export const ImportRequest = z.object({
  hospitalId: z.coerce.number({ error: 'must be a hospital number' }).int({ error: 'must be a whole number' }).positive({ error: 'must be positive' }),
  token: z.string({ error: 'must be the token of a preview' }).regex(/^[A-Za-z0-9_-]{16,64}$/, { error: 'must be the token of a preview' }).optional(),
});
export type ImportRequest = z.infer<typeof ImportRequest>;

// ---- The report -------------------------------------------------------------------------------

export const REPORT_STANDARDS = ['iss', 'nfti', 'iss-or-nfti'] as const satisfies readonly OutcomeStandard[];
/** Which level counts as "the activation": what the ED decided (the recommendation when undecided), or what Plumbline recommended. */
export const ACTIVATION_BASES = ['decided', 'recommended'] as const;
export type ActivationBasis = (typeof ACTIVATION_BASES)[number];

/** Fall-height bands for the breakdown [ours], upper bounds inclusive. */
export const HEIGHT_BANDS = [
  { id: 'standing', label: 'From standing (0 m)', upToM: 0 },
  { id: 'to-3m', label: 'Up to 3 m', upToM: 3 },
  { id: '3-6m', label: 'Over 3 m to 6 m', upToM: 6 },
  { id: '6-15m', label: 'Over 6 m to 15 m', upToM: 15 },
  { id: 'over-15m', label: 'Over 15 m', upToM: Infinity },
] as const;
export type HeightBandId = (typeof HEIGHT_BANDS)[number]['id'] | 'unknown';
export const HEIGHT_BAND_IDS = [...HEIGHT_BANDS.map((b) => b.id), 'unknown'] as const;

export function heightBandOf(heightM: number | null | undefined): HeightBandId {
  if (heightM == null || !Number.isFinite(heightM)) return 'unknown';
  for (const band of HEIGHT_BANDS) if (heightM <= band.upToM) return band.id;
  return 'over-15m';
}

const isoDate = boundedDate;
const positiveId = (what: string) => z.coerce.number({ error: `must be ${what}` }).int({ error: 'must be a whole number' }).positive({ error: 'must be positive' });

const reportShape = {
  hospitalId: positiveId('a hospital number'),
  from: isoDate,
  to: isoDate,
  standard: z.enum(REPORT_STANDARDS, { error: `must be one of: ${REPORT_STANDARDS.join(', ')}` }).default('iss'),
  basis: z.enum(ACTIVATION_BASES, { error: `must be one of: ${ACTIVATION_BASES.join(', ')}` }).default('decided'),
  /** The reader's time zone decides where a day and a month begin. */
  timeZone: ReaderTimeZone,
};
const inOrder = (q: { from: string; to: string }) => q.from <= q.to;
const orderIssue = { error: 'must be on or after the start date', path: ['to'] };

export const ReportQuery = z.object(reportShape).refine(inOrder, orderIssue).refine(withinMaxSpan, spanIssue);
export type ReportQuery = z.infer<typeof ReportQuery>;
export type ReportRequest = z.input<typeof ReportQuery>;

export const CELLS = ['a', 'b', 'c', 'd'] as const;
export type Cell = (typeof CELLS)[number];

/** The drill-down: the cases behind one number of the report. */
export const DrilldownQuery = z
  .object({
    ...reportShape,
    cell: z.enum([...CELLS, 'all', 'no-outcome'], { error: 'must be a, b, c, d, all or no-outcome' }).default('all'),
    month: z.string().regex(/^\d{4}-\d{2}$/, { error: 'must be a month (YYYY-MM)' }).optional(),
    agencyId: positiveId('an agency number').optional(),
    band: z.enum(HEIGHT_BAND_IDS, { error: `must be one of: ${HEIGHT_BAND_IDS.join(', ')}` }).optional(),
    criterion: z.string().max(100).optional(),
  })
  .refine(inOrder, orderIssue).refine(withinMaxSpan, spanIssue);
export type DrilldownQuery = z.infer<typeof DrilldownQuery>;
export type DrilldownRequest = z.input<typeof DrilldownQuery>;

export interface Rates {
  overTriage: number | null;
  underTriage: number | null;
  overTriageCI: Interval | null;
  underTriageCI: Interval | null;
}

export interface Matrix extends Rates {
  a: number;
  b: number;
  c: number;
  d: number;
  /** Cases with an outcome that cannot tell under the chosen standard (e.g. NFTI fields missing). */
  excluded: number;
  /** 1 − sensitivity and 1 − specificity [memory: Peng & Xiang 2016], shown beside the Cribari figures. */
  sensitivityDefinition: Rates & { definition: string };
}

export interface Targets {
  /** Under-triage below this [source: Mohan D et al., Arch Surg 2011]. */
  underTriageMax: number;
  /** Over-triage at hospital level within this range [memory]. */
  overTriageHospital: [number, number];
  /** Over-triage at system level below this [source: Mohan 2011]. */
  overTriageSystemMax: number;
}

export const TargetsInput = z
  .object({
    underTriageMax: z.number({ error: 'must be a fraction between 0 and 1' }).min(0, { error: 'must be at least 0' }).max(1, { error: 'must be at most 1' }),
    overTriageHospital: z.tuple([z.number().min(0).max(1), z.number().min(0).max(1)], { error: 'must be two fractions between 0 and 1' }),
    overTriageSystemMax: z.number({ error: 'must be a fraction between 0 and 1' }).min(0, { error: 'must be at least 0' }).max(1, { error: 'must be at most 1' }),
  })
  .refine((t) => t.overTriageHospital[0] <= t.overTriageHospital[1], { error: 'the lower bound must not be above the upper bound', path: ['overTriageHospital'] });
export type TargetsInput = z.infer<typeof TargetsInput>;

/** How a rate stands against its target, reading the 95 % interval, not just the point. */
export type TargetStanding = 'meets' | 'misses' | 'uncertain' | 'no-data';

export interface MatrixGroup extends Matrix {
  key: string;
  label: string;
}

export interface CriterionFigure {
  id: string;
  label: string;
  /** Cases with a known outcome where the criterion fired. */
  fired: number;
  major: number;
  /** Positive predictive value for major trauma: major / fired, with its 95 % interval. */
  ppv: number | null;
  ppvCI: Interval | null;
  /** Fired in over-triaged (b) and in under-triaged (c) cases. */
  inOverTriaged: number;
  inUnderTriaged: number;
}

export interface QualityReport {
  query: ReportQuery;
  hospital: { id: number; name: string };
  /** The level names of the hospital's policy in force, for every level the screens name. */
  levels: { id: LevelId; name: string }[];
  generatedAt: number;
  /** Cases in the period (cancelled ones left out) and how many have an outcome. */
  cases: number;
  withOutcome: number;
  /** Cases with an outcome but no recorded decision; their recommended level stood in. */
  undecided: number;
  matrix: Matrix;
  /** The same cases with Plumbline's recommended level as the activation, for comparison. */
  recommendedMatrix: Matrix;
  targets: Targets;
  standing: { underTriage: TargetStanding; overTriage: TargetStanding };
  months: MatrixGroup[];
  agencies: MatrixGroup[];
  heightBands: MatrixGroup[];
  criteria: CriterionFigure[];
  ms: number;
}

export interface DrilldownCase {
  id: number;
  caseNumber: string;
  createdAt: number;
  agency: string;
  heightM: number | null;
  recommendedLevel: LevelId;
  decidedLevel: LevelId | null;
  iss: number | null;
  nftiPositive: boolean | null;
  cell: Cell | null;
  criteria: string[];
}

export interface Drilldown {
  total: number;
  cases: DrilldownCase[];
  /** Only the first cases are listed; the total says how many there are. */
  limited: boolean;
}

// ---- What-if ----------------------------------------------------------------------------------

export const WhatIfRequest = z
  .object({
    ...reportShape,
    /** The policy in force now, or a version of the hospital's policy by its id. */
    policy: z.union([z.literal('in-force'), z.number({ error: 'must be a policy version number' }).int().positive()], { error: 'must be in-force or a policy version number' }),
  })
  .refine(inOrder, orderIssue).refine(withinMaxSpan, spanIssue);
export type WhatIfRequest = z.input<typeof WhatIfRequest>;
export type WhatIfQuery = z.infer<typeof WhatIfRequest>;

export interface WhatIfPolicyChoice {
  value: 'in-force' | number;
  label: string;
  status: 'in-force' | 'draft' | 'approved' | 'published' | 'retired';
}

export interface LevelCounts { full: number; limited: number; consult: number; none: number }

export interface WhatIfChange {
  id: number;
  caseNumber: string;
  createdAt: number;
  from: LevelId;
  to: LevelId;
  /** The level under the policy in force now; null when that is the policy tried. */
  inForce: LevelId | null;
  decidedLevel: LevelId | null;
  iss: number | null;
  nftiPositive: boolean | null;
  major: boolean | null;
  /** The draft's criteria that fired for the case. */
  criteria: string[];
}

export interface WhatIfResult {
  policy: { id: string; version: number; name: string; example: boolean; status: WhatIfPolicyChoice['status'] };
  cases: number;
  withOutcome: number;
  levels: { decided: LevelCounts; recommended: LevelCounts; whatIf: LevelCounts };
  matrix: { decided: Matrix; recommended: Matrix; whatIf: Matrix };
  /** The same cases under the policy in force now, beside the one tried; null when that is the policy tried. */
  inForce: { policy: WhatIfResult['policy']; levels: LevelCounts; matrix: Matrix } | null;
  changed: number;
  raised: number;
  lowered: number;
  changes: WhatIfChange[];
  limited: boolean;
  ms: number;
  /** The tried version's own criteria, read back, with the level each calls. */
  localCriteria?: { label: string; sentence: string; level: string }[];
}
