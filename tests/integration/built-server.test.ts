import { randomUUID } from 'node:crypto';
import { strFromU8, unzipSync } from 'fflate';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { CaseSummary } from '../../shared/schemas/cases';
import { childServer, type ChildServer } from '../bench/support/child-server';
import { signIn, type SignedInClient } from '../support/sign-in';
import { command, connectAs, type TestSocket } from '../support/socket';
import { until } from '../support/until';

// `npm start` runs the build in dist/server, where the packages every start loads are bundled
// in and compressed (server/cli/server-build.mjs). The other tests run the TypeScript sources, so
// this one walks the paths through those packages on the build itself, as a separate process:
// the sign-in redirects (openid-client against the local oidc-provider), a pre-alert over a
// socket, a page e-mailed through nodemailer to the local SMTP fake (smtp-server, mailparser),
// a multipart CSV upload (multer, csv-parse), a FHIR export as a ZIP (fflate), the OpenAPI
// document and its viewer's files, and a machine client's token.

// SBP 84 < 90 mmHg at age 34: high risk in the 2021 field-triage guideline (SOURCES.md §2.5), and
// a full activation under the example policy [ours] (SOURCES.md §6).
const HYPOTENSIVE = { ageYears: 34, sex: 'male', fall: { heightM: 4 }, vitals: { sbp: 84, hr: 120 } };

let server: ChildServer;
let nurse: SignedInClient;
let quality: SignedInClient;
let admin: SignedInClient;
let crew: TestSocket;
let general: number;

beforeAll(async () => {
  server = await childServer();
  await server.start();
  [nurse, quality, admin] = await Promise.all(['nurse', 'quality', 'admin'].map((who) => signIn(server.url, `${who}@plumbline.test`)));
  crew = await connectAs(server.url, await signIn(server.url, 'paramedic@plumbline.test'));
  const hospitals = (await (await admin.get('/api/people/hospitals')).json()) as Array<{ id: number; shortName: string }>;
  general = hospitals.find((h) => h.shortName === 'Alderwick General')!.id;
}, 120_000);

afterAll(async () => {
  crew?.close();
  await server?.dispose();
});

describe('the built server', () => {
  it('takes a pre-alert, and mails the page to the team through the local SMTP fake', async () => {
    const submitted = await command<{ summary: CaseSummary }>(crew, 'case:submit', { clientId: randomUUID(), hospitalId: general, etaMinutes: 9, clinical: HYPOTENSIVE });
    if (!submitted.ok) throw new Error(submitted.error.message);
    let summary = submitted.data.summary;
    expect(summary.recommendedLevel).toBe('full');
    for (const [action, body] of [['acknowledge', {}], ['decide', { level: 'full' }], ['page', {}]] as const) {
      const res = await nurse.send('POST', `/api/cases/${summary.id}/${action}`, { rowVersion: summary.rowVersion, ...body });
      expect([action, res.status]).toEqual([action, 200]);
      summary = ((await res.json()) as { case: CaseSummary }).case;
    }
    // The message went over SMTP and was parsed back; the Messages sent page lists it.
    const ofThisCase = (messages: Array<{ subject: string }>) => messages.find((m) => m.subject.includes(`case ${summary.caseNumber})`));
    const listed = await until(async () => ((await (await admin.get('/api/messages')).json()) as { messages: Array<{ subject: string }> }).messages, (messages) => ofThisCase(messages) !== undefined);
    expect(ofThisCase(listed)!.subject).toMatch(/^Full trauma team: /);
  });

  it('reads an uploaded outcomes file and names its problems', async () => {
    const form = new FormData();
    form.set('hospitalId', String(general));
    form.set('file', new Blob(['case_number,iss\nP99-99999,9\n'], { type: 'text/csv' }), 'registry.csv');
    const res = await quality.fetch(new URL('/api/quality/outcomes/preview', server.url), { method: 'POST', body: form, headers: { origin: new URL(server.url).origin, accept: 'application/json' } });
    expect(res.status).toBe(200);
    const preview = (await res.json()) as { token: string | null; errors: Array<{ row: number; column: string }> };
    expect(preview.token).toBeNull();
    expect(preview.errors).toEqual([expect.objectContaining({ row: 2, column: 'case_number' })]);
  });

  it('exports FHIR resources as a ZIP of NDJSON files', async () => {
    const res = await quality.get(`/api/quality/export.ndjson?hospitalId=${general}&from=2000-01-01&to=${new Date().toISOString().slice(0, 10)}`);
    expect(res.headers.get('content-type')).toBe('application/zip');
    const files = unzipSync(new Uint8Array(await res.arrayBuffer()));
    expect(Object.keys(files).sort()).toEqual(['Encounter.ndjson', 'Observation.ndjson', 'Patient.ndjson', 'Provenance.ndjson']);
    expect(JSON.parse(strFromU8(files['Patient.ndjson']).split('\n')[0]).resourceType).toBe('Patient');
  });

  it('serves the OpenAPI document and its viewer from node_modules', async () => {
    const doc = (await (await admin.get('/api/openapi.json')).json()) as { openapi: string; paths: Record<string, unknown> };
    expect(doc.openapi).toMatch(/^3\.1/);
    expect(Object.keys(doc.paths)).toContain('/api/pre-alerts');
    const viewer = await admin.fetch(new URL('/api/docs/viewer/swagger-ui.css', server.url));
    expect(viewer.status).toBe(200);
    expect((await viewer.text()).length).toBeGreaterThan(1000);
  });

  it('gives a registered machine client a token from the local identity provider', async () => {
    const { agencies } = (await (await admin.get('/api/people/agencies')).json()) as { agencies: Array<{ id: number }> };
    const created = await admin.send('POST', '/api/people/machine-clients', { name: 'Build check', agencyId: agencies[0].id });
    expect(created.status).toBe(201);
    const { client, clientSecret, tokenEndpoint } = (await created.json()) as { client: { clientId: string }; clientSecret: string; tokenEndpoint: string };
    const token = await fetch(tokenEndpoint, {
      method: 'POST',
      headers: { 'content-type': 'application/x-www-form-urlencoded', authorization: `Basic ${Buffer.from(`${client.clientId}:${clientSecret}`).toString('base64')}` },
      body: new URLSearchParams({ grant_type: 'client_credentials' }),
    });
    expect(token.status, await token.clone().text()).toBe(200);
    // Machine tokens last 10 minutes [ours: MACHINE_TOKEN_SECONDS in server/idp/provider.ts].
    expect(((await token.json()) as { expires_in: number }).expires_in).toBe(600);
  });
});
