import { OpenAPIRegistry, OpenApiGeneratorV31 } from '@asteasolutions/zod-to-openapi';
import { z } from 'zod';
import { BOARD_ACTION_SCHEMAS, BOARD_ACTIONS } from '../shared/schemas/board';
import { PreAlert } from '../shared/schemas/cases';
import { FhirExportQuery } from '../shared/schemas/exchange';
import { IssuedMachineClient, MachineClientView, RegisterMachineClient } from '../shared/schemas/machine-clients';
import { AgencyDestinations, AgencyFields, CreateUser, HospitalFields, SetPassword, UnitFields, UpdateHospital, UpdateUnit, UpdateUser } from '../shared/schemas/people';
import { ApproveVersion, CreateDraft, LocalPreviewQuery, PublishVersion, SaveDraft } from '../shared/schemas/policies';
import { DrilldownQuery, ImportRequest, ReportQuery, WhatIfRequest } from '../shared/schemas/quality';
import { CloseDiscussion, ComplianceQuery, FlagForPeerReview, ResponseSettings, ReviewListQuery, SignOff } from '../shared/schemas/review';
import { Me } from '../shared/roles';
import { FhirPreAlertBundle } from './exchange/fhir-in';
import { SESSION_COOKIE } from './auth/session';
import { BoardQuery } from './routes/board';
import { CaseListQuery } from './routes/cases';
import { MailQuery } from './routes/mail';
import { HospitalQuery as PolicyHospitalQuery } from './routes/policies';
import { HospitalQuery as QualityHospitalQuery, TargetsRequest } from './routes/quality';
import { HospitalQuery as ReviewHospitalQuery } from './routes/review';
import { IdParam } from './routes/params';
import { HospitalQuery as PagingHospitalQuery, IntervalQuery as PagingIntervalQuery, Limit as MessageLimit } from './routes/paging';
import { HospitalQuery as AuditHospitalQuery } from './routes/audit';
import { PagingContact, PagingPlan } from '../shared/schemas/paging';
import { ProgrammeEmail } from '../shared/schemas/audit';
import { HospitalBays } from '../shared/schemas/bays';
import { ACCESS, SCOPE_WORDS, type Action } from '../shared/access';

type Method = 'get' | 'post' | 'put' | 'patch' | 'delete';

/** One API operation: the shared schemas its router parses, and who may call it. */
interface Operation {
  method: Method;
  path: string;
  summary: string;
  /** Its action in the access map (the roles and scope come from there); 'signed-in' for anyone signed in; null for no sign-in at all. */
  access: Action | 'signed-in' | null;
  query?: z.ZodObject;
  params?: z.ZodObject;
  body?: z.ZodType;
  /** A body of another media type than JSON (a CSV upload, a FHIR Bundle). */
  upload?: 'csv';
  machine?: boolean;
  response?: { type: string; schema?: z.ZodType; description: string };
}

const ErrorBody = z.object({
  error: z.object({ code: z.string(), message: z.string(), field: z.string().optional(), issues: z.array(z.object({ field: z.string(), message: z.string() })).optional() }),
}).meta({ id: 'Error' });

const fhirJson = { type: 'application/fhir+json', description: 'A FHIR R4 resource' };
const csv = { type: 'text/csv', description: 'A CSV file (UTF-8 with a byte-order mark)' };
const CsvUpload = z.object({ file: z.string().meta({ format: 'binary' }), hospitalId: z.string(), token: z.string().optional() });

/** Every /api route. The test in tests/integration/openapi.test.ts walks the Express router and compares. */
export const API_OPERATIONS: readonly Operation[] = [
  { method: 'get', path: '/api/health', summary: 'Whether the server and its database answer', access: null },
  { method: 'get', path: '/api/health/ready', summary: 'For a load balancer: 200 when the database and Redis (when configured) answer, 503 naming what failed', access: null },
  { method: 'get', path: '/api/me', summary: 'The signed-in person, their roles and memberships', access: 'signed-in', response: { type: 'application/json', schema: Me, description: 'The signed-in person' } },
  { method: 'get', path: '/api/mail', summary: "The built-in mail catcher's inbox", access: 'messages.read', query: MailQuery },

  { method: 'get', path: '/api/cases', summary: 'Cases of your hospitals and agencies, in arrival order', access: 'cases.read', query: CaseListQuery },
  { method: 'get', path: '/api/cases/{id}', summary: 'One case with its revisions and events', access: 'cases.read', params: IdParam },
  { method: 'get', path: '/api/cases/{id}/fhir', summary: 'One case as a FHIR R4 Bundle (collection)', access: 'cases.read', params: IdParam, response: fhirJson },
  ...BOARD_ACTIONS.map((action): Operation => ({ method: 'post', path: `/api/cases/{id}/${action}`, summary: `Board action: ${action}`, access: 'board.act', params: IdParam, body: BOARD_ACTION_SCHEMAS[action] })),
  { method: 'get', path: '/api/board', summary: "A hospital's inbound board, whole or changes since a cursor", access: 'board.read', query: BoardQuery },
  { method: 'get', path: '/api/crew/destinations', summary: "The hospitals and units of the paramedic's agencies", access: 'pre-alerts.send' },
  {
    method: 'post', path: '/api/pre-alerts', summary: 'A pre-alert from a machine client: native JSON or a FHIR Bundle; the same sender id twice makes one case', access: null, machine: true,
    body: z.union([PreAlert, FhirPreAlertBundle]),
  },

  { method: 'get', path: '/api/policies', summary: "A hospital's activation policy versions", access: 'policies.read', query: PolicyHospitalQuery },
  { method: 'get', path: '/api/policies/{id}', summary: 'One policy version', access: 'policies.read', params: IdParam },
  { method: 'post', path: '/api/policies', summary: 'Start a draft policy', access: 'policies.draft', body: CreateDraft },
  { method: 'put', path: '/api/policies/{id}', summary: 'Save a draft policy', access: 'policies.draft', params: IdParam, body: SaveDraft },
  { method: 'delete', path: '/api/policies/{id}', summary: 'Discard a draft policy', access: 'policies.draft', params: IdParam },
  { method: 'post', path: '/api/policies/{id}/approve', summary: 'Approve a policy version (a trauma lead other than its author), acknowledging any loosening', access: 'policies.approve', params: IdParam, body: ApproveVersion },
  { method: 'post', path: '/api/policies/local-preview', summary: "A local criterion's read-back sentence and past cases it would catch", access: 'policies.read', body: LocalPreviewQuery },
  { method: 'post', path: '/api/policies/{id}/publish', summary: 'Put an approved policy version in force', access: 'policies.publish', params: IdParam, body: PublishVersion },

  { method: 'get', path: '/api/people/users', summary: 'People of your hospitals and agencies', access: 'people.manage' },
  { method: 'post', path: '/api/people/users', summary: 'Add a person', access: 'people.manage', body: CreateUser },
  { method: 'patch', path: '/api/people/users/{id}', summary: "Change a person's name, roles or memberships", access: 'people.manage', params: IdParam, body: UpdateUser },
  { method: 'post', path: '/api/people/users/{id}/password', summary: "Set a person's password (built-in identity provider)", access: 'people.manage', params: IdParam, body: SetPassword },
  { method: 'post', path: '/api/people/users/{id}/reactivate', summary: 'Reactivate a person', access: 'people.manage', params: IdParam },
  { method: 'post', path: '/api/people/users/{id}/deactivate', summary: 'Deactivate a person and end their sessions', access: 'people.manage', params: IdParam },
  { method: 'get', path: '/api/people/hospitals', summary: 'Your hospitals', access: 'people.manage' },
  { method: 'post', path: '/api/people/hospitals', summary: 'Add a hospital', access: 'people.manage', body: HospitalFields },
  { method: 'patch', path: '/api/people/hospitals/{id}', summary: 'Change a hospital', access: 'people.manage', params: IdParam, body: UpdateHospital },
  { method: 'get', path: '/api/people/agencies', summary: 'Your ambulance agencies with their units and destinations', access: 'people.manage' },
  { method: 'post', path: '/api/people/agencies', summary: 'Add an ambulance agency', access: 'people.manage', body: AgencyFields },
  { method: 'patch', path: '/api/people/agencies/{id}', summary: 'Rename an ambulance agency', access: 'people.manage', params: IdParam, body: AgencyFields },
  { method: 'post', path: '/api/people/agencies/{id}/units', summary: 'Add a unit to an agency', access: 'people.manage', params: IdParam, body: UnitFields },
  { method: 'put', path: '/api/people/agencies/{id}/destinations', summary: 'The hospitals an agency takes patients to', access: 'people.manage', params: IdParam, body: AgencyDestinations },
  { method: 'patch', path: '/api/people/units/{id}', summary: 'Change or retire a unit', access: 'people.manage', params: IdParam, body: UpdateUnit },
  { method: 'get', path: '/api/people/machine-clients', summary: "Machine clients of your agencies and the token endpoint", access: 'machine-clients.manage', response: { type: 'application/json', schema: z.object({ clients: z.array(MachineClientView), tokenEndpoint: z.string().nullable() }), description: 'The clients' } },
  { method: 'post', path: '/api/people/machine-clients', summary: 'Register a machine client for one agency; the secret is answered once', access: 'machine-clients.manage', body: RegisterMachineClient, response: { type: 'application/json', schema: IssuedMachineClient, description: 'The client and its secret' } },
  { method: 'post', path: '/api/people/machine-clients/{id}/revoke', summary: 'Revoke a machine client at once', access: 'machine-clients.manage', params: IdParam, response: { type: 'application/json', schema: MachineClientView, description: 'The revoked client' } },

  { method: 'get', path: '/api/review/cases', summary: 'Activations to review', access: 'review.read', query: ReviewListQuery },
  { method: 'get', path: '/api/review/cases.csv', summary: 'Activations to review, as CSV', access: 'review.read', query: ReviewListQuery, response: csv },
  { method: 'get', path: '/api/review/cases/{id}', summary: "One case's timeline for review", access: 'review.read', params: IdParam },
  { method: 'post', path: '/api/review/cases/{id}/sign-off', summary: 'Sign off an activation', access: 'review.write', params: IdParam, body: SignOff },
  { method: 'post', path: '/api/review/cases/{id}/flag', summary: 'Flag an activation for peer review', access: 'review.write', params: IdParam, body: FlagForPeerReview },
  { method: 'get', path: '/api/review/discussion', summary: 'Cases flagged for peer review', access: 'review.read', query: ReviewHospitalQuery },
  { method: 'post', path: '/api/review/reviews/{id}/close', summary: 'Close a peer review with its outcome', access: 'review.write', params: IdParam, body: CloseDiscussion },
  { method: 'get', path: '/api/review/compliance', summary: 'Response-time compliance', access: 'review.read', query: ComplianceQuery },
  { method: 'get', path: '/api/review/audit-chain', summary: "Whether the audit log's hash chain is whole", access: 'review.read' },
  { method: 'get', path: '/api/review/settings', summary: 'Response-time targets', access: 'review.read', query: ReviewHospitalQuery },
  { method: 'put', path: '/api/review/settings', summary: 'Change response-time targets', access: 'review.settings', body: ResponseSettings },

  { method: 'get', path: '/api/quality/outcomes/template.csv', summary: 'The registry outcome CSV template', access: 'quality.read', response: csv },
  { method: 'post', path: '/api/quality/outcomes/preview', summary: 'Check a registry outcome CSV without saving it', access: 'quality.manage', body: CsvUpload, upload: 'csv' },
  { method: 'post', path: '/api/quality/outcomes/import', summary: 'Import a registry outcome CSV, all rows or none', access: 'quality.manage', body: CsvUpload, upload: 'csv' },
  { method: 'get', path: '/api/quality/report', summary: 'Under- and over-triage for a period', access: 'quality.read', query: ReportQuery },
  { method: 'get', path: '/api/quality/report.csv', summary: 'The quality report as CSV', access: 'quality.read', query: ReportQuery, response: csv },
  { method: 'get', path: '/api/quality/cases', summary: 'The cases behind one number of the report', access: 'quality.read', query: DrilldownQuery },
  { method: 'get', path: '/api/quality/policies', summary: 'Policies a what-if may run', access: 'quality.read', query: QualityHospitalQuery },
  { method: 'post', path: '/api/quality/what-if', summary: 'Run a policy over past cases, beside the policy in force now', access: 'quality.read', body: WhatIfRequest },
  { method: 'get', path: '/api/quality/targets', summary: 'Quality targets of a hospital', access: 'quality.read', query: QualityHospitalQuery },
  { method: 'put', path: '/api/quality/targets', summary: 'Change quality targets', access: 'quality.manage', body: TargetsRequest },
  {
    method: 'get', path: '/api/quality/export.ndjson', summary: "A period's cases as FHIR Bulk Data NDJSON: one type per file, or all types in one ZIP", access: 'quality.read', query: FhirExportQuery,
    response: { type: 'application/fhir+ndjson', description: 'One resource per line (with `type`); without it, application/zip with Patient.ndjson, Encounter.ndjson, Observation.ndjson and Provenance.ndjson' },
  },

  { method: 'get', path: '/api/hospitals/{id}/bays', summary: "A hospital's bays and the open cases in each", access: 'board.read', params: IdParam },
  { method: 'put', path: '/api/hospitals/{id}/bays', summary: "Set a hospital's list of bays", access: 'bays.edit', params: IdParam, body: HospitalBays },
  { method: 'get', path: '/api/paging/hospitals/{id}', summary: "A hospital's paging plan, its people and the SMS sender", access: 'paging.manage', params: IdParam },
  { method: 'put', path: '/api/paging/hospitals/{id}/plan', summary: "Change a hospital's paging plan (tiers, minutes, lists)", access: 'paging.manage', params: IdParam, body: PagingPlan },
  { method: 'put', path: '/api/paging/contacts/{id}', summary: "A person's paging contacts (e-mail, mobile in E.164)", access: 'paging.manage', params: IdParam, body: PagingContact },
  { method: 'get', path: '/api/paging/board', summary: 'Who is coming and who declined, per open case of a hospital', access: 'board.read', query: PagingHospitalQuery },
  { method: 'get', path: '/api/paging/intervals', summary: "Page to first 'on my way', against the hospital's target", access: 'review.read', query: PagingIntervalQuery },
  { method: 'get', path: '/api/messages', summary: 'Everything sent, e-mail and SMS, with delivery state', access: 'messages.read', query: MessageLimit },
  { method: 'get', path: '/api/audit/programme-email', summary: "The trauma programme's address for audit checkpoints", access: 'audit.settings', query: AuditHospitalQuery },
  { method: 'put', path: '/api/audit/programme-email', summary: "Change the trauma programme's address for audit checkpoints", access: 'audit.settings', body: ProgrammeEmail },

  { method: 'get', path: '/api/openapi.json', summary: 'This document', access: null, response: { type: 'application/json', description: 'OpenAPI 3.1' } },
  { method: 'get', path: '/api/docs', summary: 'This document as a reference page for administrators', access: 'docs.read', response: { type: 'text/html', description: 'A page' } },
];

/** Who may call an operation, in words: the roles and scope of its action in the access map. */
export function describeAccess(op: Pick<Operation, 'access' | 'machine'>): string {
  if (op.access === null) return op.machine ? 'For machine clients with a bearer token.' : 'No sign-in needed.';
  if (op.access === 'signed-in') return 'Anyone signed in.';
  const rule = ACCESS[op.access];
  return `Roles: ${rule.roles.join(', ')}. Scope: ${SCOPE_WORDS[rule.scope]}.`;
}

/** The OpenAPI 3.1 document, generated from the shared zod schemas every route parses. */
export function openApiDocument(publicUrl: string, tokenUrl: string | null) {
  const registry = new OpenAPIRegistry();
  registry.registerComponent('securitySchemes', 'session', { type: 'apiKey', in: 'cookie', name: SESSION_COOKIE, description: 'A person signed in through the sign-in page; state-changing requests must come from a Plumbline page (Origin).' });
  if (tokenUrl) {
    registry.registerComponent('securitySchemes', 'machineClient', {
      type: 'oauth2',
      description: 'A machine client registered in People & places, with its client id and secret (HTTP Basic) at the token endpoint. Tokens are JWTs for this API only and last 10 minutes.',
      flows: { clientCredentials: { tokenUrl, scopes: {} } },
    });
  }
  for (const op of API_OPERATIONS) {
    const errors = { content: { 'application/json': { schema: ErrorBody } } };
    registry.registerPath({
      method: op.method,
      path: op.path,
      summary: op.summary,
      description: describeAccess(op),
      tags: [op.path.split('/')[2]],
      security: op.machine ? (tokenUrl ? [{ machineClient: [] }] : []) : op.access === null ? [] : [{ session: [] }],
      request: {
        ...(op.query ? { query: op.query } : {}),
        ...(op.params ? { params: op.params } : {}),
        ...(op.body
          ? { body: { required: true, content: op.upload ? { 'multipart/form-data': { schema: op.body } } : op.machine ? { 'application/json': { schema: op.body }, 'application/fhir+json': { schema: FhirPreAlertBundle } } : { 'application/json': { schema: op.body } } } }
          : {}),
      },
      responses: {
        200: { description: op.response?.description ?? 'JSON', content: { [op.response?.type ?? 'application/json']: { schema: op.response?.schema ?? z.unknown() } } },
        ...(op.body || op.query || op.params ? { 400: { description: 'The input is not valid; the message names the field', ...errors } } : {}),
        ...(op.access !== null || op.machine ? { 401: { description: op.machine ? 'No token, or a token that is expired, for another audience, or not signed by this server' : 'Not signed in', ...errors }, 403: { description: 'Not your role, hospital or agency', ...errors } } : {}),
        ...(op.machine ? { 429: { description: "Over this client's requests per minute", ...errors } } : {}),
      },
    });
  }
  return new OpenApiGeneratorV31(registry.definitions).generateDocument({
    openapi: '3.1.0',
    info: { title: 'Plumbline API', version: '1', description: 'Fall pre-alerts from ambulance to emergency department. Generated from the schemas the server validates with.' },
    servers: [{ url: publicUrl }],
  });
}
