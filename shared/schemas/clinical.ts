import { z } from 'zod';
import { CONSIDERATIONS, FINDINGS, FIRST_IMPACT_REGIONS, HEIGHT_UNITS, SEXES, SURFACES, TREATMENTS } from './clinical-options';
import { gcsTotalOf } from './units';
import { cleanText } from './text';

export * from './clinical-options';
export { describeIssues, formatIssue, fieldPath, type FieldIssue } from './issues';

// Messages are written to follow the field name: "vitals.sbp: must be at most 300".
function measure(min: number, max: number, options: { integer?: boolean } = {}) {
  let schema = z.number({ error: (issue) => (issue.input === undefined ? 'is required' : 'must be a number') });
  if (options.integer) schema = schema.int({ error: 'must be a whole number' });
  return schema
    .min(min, { error: `must be at least ${min}` })
    .max(max, { error: `must be at most ${max}` });
}

const flag = () => z.boolean({ error: 'must be true, false or null' }).nullable().optional();

function oneOf<const T extends readonly [string, ...string[]]>(values: T) {
  return z.enum(values, { error: `must be one of: ${values.join(', ')}` });
}

// The clinical input is one strict contract, the same for the socket, REST, the command line and
// the machine clients: a key it does not know is refused, named, with the nearest known field
// suggested ("unknown field SBP; did you mean vitals.sbp?"), never dropped or read as "not recorded".

/** Every field of the clinical input as a dotted path, for suggestions and the command line's help. */
export const CLINICAL_FIELDS = [
  'ageYears', 'sex', 'pregnancyWeeks', 'anticoagulant', 'weightKg', 'bodyHeightCm',
  'fall', 'fall.heightM', 'fall.surface', 'fall.firstImpact', 'fall.headImpact',
  'fall.entered', 'fall.entered.value', 'fall.entered.unit',
  'vitals', 'vitals.sbp', 'vitals.hr', 'vitals.rr', 'vitals.spo2', 'vitals.spo2RoomAir',
  'vitals.gcs', 'vitals.gcs.eye', 'vitals.gcs.verbal', 'vitals.gcs.motor', 'vitals.gcsTotal',
  'vitals.intubated', 'vitals.respiratorySupport', 'vitals.respiratoryDistress',
  'findings', 'considerations',
  'handover', 'handover.injuredAt', 'handover.anticoagulantName', 'handover.anticoagulantLastDoseAt',
  'handover.treatments', 'handover.allergies',
] as const;

function editDistance(a: string, b: string): number {
  const row = Array.from({ length: b.length + 1 }, (_, j) => j);
  for (let i = 1; i <= a.length; i++) {
    let diagonal = row[0];
    row[0] = i;
    for (let j = 1; j <= b.length; j++) {
      const above = row[j];
      row[j] = Math.min(row[j] + 1, row[j - 1] + 1, diagonal + (a[i - 1] === b[j - 1] ? 0 : 1));
      diagonal = above;
    }
  }
  return row[b.length];
}

/**
 * The known field nearest to an unknown key, ignoring case: compared with each field's full path
 * and with its last part, so that `SBP` finds `vitals.sbp` and `headimpact` finds `fall.headImpact`.
 * Null when nothing is near (more than half the key would have to change) [ours].
 */
export function nearestField(key: string, at: readonly PropertyKey[] = []): string | null {
  // Where the clinical input starts in the path: a pre-alert holds it under `clinical`.
  const path = at.map(String);
  let root = 0;
  while (root < path.length && !(CLINICAL_FIELDS as readonly string[]).includes(path.slice(root).join('.'))) root++;
  const prefix = path.slice(0, root).join('.');
  const typed = [...path.slice(root), key].join('.').toLowerCase();
  const bare = key.toLowerCase();
  let best: string | null = null;
  let bestDistance = Infinity;
  for (const field of CLINICAL_FIELDS) {
    const lower = field.toLowerCase();
    const last = lower.slice(lower.lastIndexOf('.') + 1);
    const d = Math.min(editDistance(typed, lower), editDistance(bare, last));
    if (d < bestDistance) {
      bestDistance = d;
      best = field;
    }
  }
  if (best === null || bestDistance > Math.max(1, Math.floor(bare.length / 2))) return null;
  return prefix ? `${prefix}.${best}` : best;
}

/** "unknown field SBP; did you mean vitals.sbp?" (an unknown key's name is cut at 60 characters). */
export function unknownFieldMessage(key: string, at: readonly PropertyKey[] = []): string {
  const shown = key.length > 60 ? `${key.slice(0, 60)}…` : key;
  const name = [...at.map(String), shown].join('.');
  const near = key.length > 60 ? null : nearestField(key, at);
  return `unknown field ${name}${near ? `; did you mean ${near}?` : ''}`;
}

/** A strict object: a wrong type gets `typeMessage`, an unknown key the message above. */
function strict<T extends z.core.$ZodLooseShape>(shape: T, typeMessage: string) {
  return z.strictObject(shape, {
    error: (issue) => (issue.code === 'unrecognized_keys'
      ? issue.keys.map((key) => unknownFieldMessage(key, issue.path ?? [])).join('; ')
      : typeMessage),
  });
}

// Every field but ageYears and fall.heightM may be null or absent: unknown, never normal.
export const Gcs = strict(
  {
    eye: measure(1, 4, { integer: true }).nullable().optional(),
    verbal: measure(1, 5, { integer: true }).nullable().optional(),
    motor: measure(1, 6, { integer: true }).nullable().optional(),
  },
  'must be an object with eye, verbal and motor',
);
export type Gcs = z.infer<typeof Gcs>;

export const Vitals = strict(
    {
      sbp: measure(0, 300).nullable().optional(),
      hr: measure(0, 300).nullable().optional(),
      rr: measure(0, 100).nullable().optional(),
      spo2: measure(0, 100).nullable().optional(),
      spo2RoomAir: flag(),
      gcs: Gcs.nullable().optional(),
      gcsTotal: measure(3, 15, { integer: true }).nullable().optional(),
      intubated: flag(),
      respiratorySupport: flag(),
      respiratoryDistress: flag(),
    },
    'must be an object',
  )
  .superRefine((vitals, ctx) => {
    const sum = gcsTotalOf(vitals.gcs);
    if (sum !== null && vitals.gcsTotal != null && sum !== vitals.gcsTotal) {
      ctx.addIssue({ code: 'custom', path: ['gcsTotal'], message: `does not match eye + verbal + motor (${sum})` });
    }
  });
export type Vitals = z.infer<typeof Vitals>;

export const Fall = strict(
  {
    // 1000 m is beyond any survivable fall; a larger number is a typing slip [ours].
    heightM: measure(0, 1000),
    surface: oneOf(SURFACES).nullable().optional(),
    firstImpact: oneOf(FIRST_IMPACT_REGIONS).nullable().optional(),
    headImpact: flag(),
    // The height as the crew typed it: shown and edited in their figure, never re-rounded
    // through another unit. heightM beside it is what the criteria read.
    entered: strict({ value: measure(0, 4000), unit: oneOf(HEIGHT_UNITS) }, 'must be an object with value and unit')
      .nullable()
      .optional(),
  },
  'must be an object with heightM',
);
export type Fall = z.infer<typeof Fall>;

/** A list of catalogue ids: each once, so never longer than the catalogue. */
function idList<const T extends readonly [string, ...string[]]>(values: T) {
  return z
    .array(oneOf(values), { error: 'must be a list' })
    .max(values.length, { error: `must list each of the ${values.length} known ids at most once` })
    .refine((list) => new Set(list).size === list.length, { error: 'must list each id at most once' })
    .optional();
}

const when = z.number({ error: 'must be a time (milliseconds since 1970)' }).int({ error: 'must be whole milliseconds' }).positive({ error: 'must be a time' });
// Free text of the handover: control characters and direction overrides removed (text.ts), then bounded.
const shortText = (max: number) =>
  z.string({ error: 'must be text' }).transform((value) => cleanText(value)).pipe(z.string().max(max, { error: `must be at most ${max} characters` }));

/**
 * The handover beyond the criteria: what the ED prepares for. Every part is optional and none
 * is read by the criteria (the anticoagulant flag above is the one they read).
 */
export const Handover = strict(
  {
    injuredAt: when.nullable().optional(),
    anticoagulantName: shortText(80).nullable().optional(),
    anticoagulantLastDoseAt: when.nullable().optional(),
    treatments: idList(TREATMENTS),
    allergies: shortText(200).nullable().optional(),
  },
  'must be an object',
);
export type Handover = z.infer<typeof Handover>;

export const ClinicalInput = strict(
  {
    ageYears: measure(0, 120),
    sex: oneOf(SEXES).nullable().optional(),
    pregnancyWeeks: measure(0, 45).nullable().optional(),
    anticoagulant: flag(),
    // Optional: lets the impact carry kinetic energy.
    weightKg: measure(0, 400).nullable().optional(),
    // The child's own standing height (or length), for the 2011 fall rule's "two to three times
    // the height of the child" (SOURCES.md §3.4); 30–250 cm spans newborns to the tallest adults [ours].
    bodyHeightCm: measure(30, 250).nullable().optional(),
    fall: Fall,
    vitals: Vitals.nullable().optional(),
    findings: idList(FINDINGS),
    considerations: idList(CONSIDERATIONS),
    handover: Handover.nullable().optional(),
  },
  'must be an object with ageYears and fall',
).superRefine((input, ctx) => {
  // A patient recorded male is not asked about pregnancy (SOURCES.md §2.6) [ours].
  if (input.sex === 'male' && input.pregnancyWeeks != null && input.pregnancyWeeks > 0) {
    ctx.addIssue({
      code: 'custom', path: ['pregnancyWeeks'],
      message: 'a pregnancy is recorded for a patient recorded male; correct the sex or clear the weeks pregnant',
    });
  }
});
export type ClinicalInput = z.infer<typeof ClinicalInput>;
