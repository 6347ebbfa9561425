import { z } from 'zod';

export const FHIR_EXPORT_TYPES = ['Patient', 'Encounter', 'Observation', 'Provenance'] as const;
export type FhirExportType = (typeof FHIR_EXPORT_TYPES)[number];

const isoDate = z.iso.date({ error: 'must be a date (YYYY-MM-DD)' });

/** A period of one hospital's cases for the registry, by the day each pre-alert arrived (UTC), both ends included. */
export const FhirExportQuery = z
  .object({
    hospitalId: z.coerce.number({ error: 'must be a hospital number' }).int({ error: 'must be a whole number' }).positive({ error: 'must be positive' }),
    from: isoDate,
    to: isoDate,
    /** One resource type as NDJSON; without it, a ZIP with one NDJSON file per type. */
    type: z.enum(FHIR_EXPORT_TYPES, { error: `must be one of: ${FHIR_EXPORT_TYPES.join(', ')}` }).optional(),
  })
  .refine((q) => q.from <= q.to, { error: 'must be on or after the start date', path: ['to'] });
export type FhirExportQuery = z.infer<typeof FhirExportQuery>;
