import type { Knex } from 'knex';
import { zipSync, strToU8 } from 'fflate';
import { FHIR_EXPORT_TYPES, type FhirExportQuery, type FhirExportType } from '../../shared/schemas/exchange';
import type { Me } from '../../shared/roles';
import { caseBundle, caseResources, type FhirBundle, type FhirResource } from './fhir';
import { invalid } from '../errors';
import { caseEvents, caseForReader } from '../services/cases/queries';
import { caseSummary, listCaseSummaries } from '../services/cases/summary';
import { assertQualityReader } from '../services/quality/report';

const DAY = 86_400_000;
/** A registry export holds at most this many cases; a longer period is refused and asked for in parts. */
export const EXPORT_MAX_CASES = 5000;

/** One case as a FHIR R4 Bundle, for someone who may read it. */
export async function fhirBundleOfCase(db: Knex, me: Me, caseId: number, at: number): Promise<FhirBundle> {
  await caseForReader(db, me, caseId);
  return caseBundle(await caseSummary(db, caseId), await caseEvents(db, caseId), at);
}

/** Every resource of a period's cases, grouped by type, in the order the cases arrived. */
export async function fhirResourcesOfPeriod(db: Knex, me: Me, query: FhirExportQuery): Promise<Map<FhirExportType, FhirResource[]>> {
  assertQualityReader(me, query.hospitalId);
  const start = Date.parse(`${query.from}T00:00:00Z`);
  const end = Date.parse(`${query.to}T00:00:00Z`) + DAY;
  const ids = (await db('cases').where({ hospital_id: query.hospitalId }).andWhere('created_at', '>=', start).andWhere('created_at', '<', end).orderBy('created_at').limit(EXPORT_MAX_CASES + 1).pluck('id')) as number[];
  if (ids.length > EXPORT_MAX_CASES) throw invalid([{ field: 'to', message: `the period holds more than ${EXPORT_MAX_CASES} cases; export it in shorter periods` }]);
  const byType = new Map<FhirExportType, FhirResource[]>(FHIR_EXPORT_TYPES.map((type) => [type, []]));
  for (let i = 0; i < ids.length; i += 200) {
    const batch = ids.slice(i, i + 200);
    for (const summary of await listCaseSummaries(db, { ids: batch, limit: batch.length })) {
      for (const resource of caseResources(summary, await caseEvents(db, summary.id))) byType.get(resource.resourceType as FhirExportType)?.push(resource);
    }
  }
  return byType;
}

/** FHIR Bulk Data's layout: one resource per line, one resource type per file. */
export const ndjson = (resources: FhirResource[]) => resources.map((r) => JSON.stringify(r)).join('\n') + (resources.length ? '\n' : '');

/** Every type's NDJSON file in one ZIP, named as Bulk Data names them (`Patient.ndjson`, …). */
export function ndjsonZip(byType: Map<FhirExportType, FhirResource[]>): Uint8Array {
  const files: Record<string, Uint8Array> = {};
  for (const [type, resources] of byType) files[`${type}.ndjson`] = strToU8(ndjson(resources));
  return zipSync(files, { level: 6 });
}
