import { z } from 'zod';
import { CONSIDERATIONS, FINDINGS, FIRST_IMPACT_REGIONS, HEIGHT_UNITS, SEXES, SURFACES, TREATMENTS } from './clinical-options';
import { gcsTotalOf } from './units';

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

// Every field but ageYears and fall.heightM may be null or absent: unknown, never normal.
export const Gcs = z.object(
  {
    eye: measure(1, 4, { integer: true }).nullable().optional(),
    verbal: measure(1, 5, { integer: true }).nullable().optional(),
    motor: measure(1, 6, { integer: true }).nullable().optional(),
  },
  { error: 'must be an object with eye, verbal and motor' },
);
export type Gcs = z.infer<typeof Gcs>;

export const Vitals = z
  .object(
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
    { error: 'must be an object' },
  )
  .superRefine((vitals, ctx) => {
    const sum = gcsTotalOf(vitals.gcs);
    if (sum !== null && vitals.gcsTotal != null && sum !== vitals.gcsTotal) {
      ctx.addIssue({ code: 'custom', path: ['gcsTotal'], message: `does not match eye + verbal + motor (${sum})` });
    }
  });
export type Vitals = z.infer<typeof Vitals>;

export const Fall = z.object(
  {
    // 1000 m is beyond any survivable fall; a larger number is a typing slip [ours].
    heightM: measure(0, 1000),
    surface: oneOf(SURFACES).nullable().optional(),
    firstImpact: oneOf(FIRST_IMPACT_REGIONS).nullable().optional(),
    headImpact: flag(),
    // The height as the crew typed it: shown and edited in their figure, never re-rounded
    // through another unit. heightM beside it is what the criteria read.
    entered: z
      .object({ value: measure(0, 4000), unit: oneOf(HEIGHT_UNITS) }, { error: 'must be an object with value and unit' })
      .nullable()
      .optional(),
  },
  { error: 'must be an object with heightM' },
);
export type Fall = z.infer<typeof Fall>;

const when = z.number({ error: 'must be a time (milliseconds since 1970)' }).int({ error: 'must be whole milliseconds' }).positive({ error: 'must be a time' });
const shortText = (max: number) => z.string({ error: 'must be text' }).trim().max(max, { error: `must be at most ${max} characters` });

/**
 * The handover beyond the criteria: what the ED prepares for. Every part is optional and none
 * is read by the criteria (the anticoagulant flag above is the one they read).
 */
export const Handover = z.object(
  {
    injuredAt: when.nullable().optional(),
    anticoagulantName: shortText(80).nullable().optional(),
    anticoagulantLastDoseAt: when.nullable().optional(),
    treatments: z
      .array(oneOf(TREATMENTS), { error: 'must be a list' })
      .max(TREATMENTS.length, { error: `must hold at most ${TREATMENTS.length} entries` })
      .refine((list) => new Set(list).size === list.length, { error: 'must not repeat an entry' })
      .optional(),
    allergies: shortText(200).nullable().optional(),
  },
  { error: 'must be an object' },
);
export type Handover = z.infer<typeof Handover>;

export const ClinicalInput = z.object(
  {
    ageYears: measure(0, 120),
    sex: oneOf(SEXES).nullable().optional(),
    pregnancyWeeks: measure(0, 45).nullable().optional(),
    anticoagulant: flag(),
    // Beyond DESIGN.md, optional: lets the impact carry kinetic energy.
    weightKg: measure(0, 400).nullable().optional(),
    fall: Fall,
    vitals: Vitals.nullable().optional(),
    findings: z.array(oneOf(FINDINGS), { error: 'must be a list' }).optional(),
    considerations: z.array(oneOf(CONSIDERATIONS), { error: 'must be a list' }).optional(),
    handover: Handover.nullable().optional(),
  },
  { error: 'must be an object with ageYears and fall' },
);
export type ClinicalInput = z.infer<typeof ClinicalInput>;
