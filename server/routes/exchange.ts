import express, { Router, type Request } from 'express';
import { PreAlert } from '../../shared/schemas/cases';
import { FhirExportQuery } from '../../shared/schemas/exchange';
import type { AppDeps } from '../deps';
import { requireAccess, requireUser } from '../auth/guards';
import { parseOr400 } from '../errors';
import { preAlertFromBundle } from '../exchange/fhir-in';
import { requireMachineClient } from '../exchange/machine-auth';
import { announceCase } from '../realtime/broadcast';
import { submitPreAlert } from '../services/cases/commands';
import { caseSummary } from '../services/cases/summary';
import { fhirBundleOfCase, fhirResourcesOfPeriod, ndjson, ndjsonZip } from '../exchange/fhir-export';
import { CaseIdParam } from './params';

const FHIR_JSON = 'application/fhir+json';
const isBundle = (body: unknown) => typeof body === 'object' && body !== null && (body as { resourceType?: unknown }).resourceType !== undefined;

/** FHIR out, and pre-alerts in from machine clients through the crew's own path. */
export function exchangeRouter(deps: AppDeps): Router {
  const { db, clock } = deps;
  const router = Router();

  router.post('/api/pre-alerts', requireMachineClient(deps), express.json({ type: FHIR_JSON, limit: '256kb' }), async (req: Request, res) => {
    const { client, me } = req.machine!;
    // Native JSON or a FHIR Bundle; either way the same strict schema, evaluation and idempotency.
    const payload = parseOr400(PreAlert, isBundle(req.body) ? preAlertFromBundle(req.body) : req.body);
    const { caseId, created } = await submitPreAlert(db, clock, { me, role: 'machine_client', source: client.name }, payload);
    const summary = await caseSummary(db, caseId);
    if (created) announceCase(deps, summary, 'submitted');
    res.status(created ? 201 : 200).json({ caseId, caseNumber: summary.caseNumber, created, fieldRisk: summary.fieldRisk, recommendedLevel: summary.recommendedLevel, criteria: summary.latest.result.criteria.map((c) => c.id), missing: summary.latest.result.missing });
  });

  router.get('/api/cases/:id/fhir', requireUser(db), requireAccess('cases.read'), async (req, res) => {
    const { id } = parseOr400(CaseIdParam, req.params);
    res.type(FHIR_JSON).set('Cache-Control', 'no-store').send(JSON.stringify(await fhirBundleOfCase(db, req.me!, id, clock.now())));
  });

  router.get('/api/quality/export.ndjson', requireUser(db), requireAccess('quality.read'), async (req, res) => {
    const query = parseOr400(FhirExportQuery, req.query);
    const byType = await fhirResourcesOfPeriod(db, req.me!, query);
    res.set('Cache-Control', 'no-store');
    const name = `fhir-${query.hospitalId}-${query.from}-to-${query.to}`;
    if (query.type) res.type('application/fhir+ndjson').attachment(`${name}-${query.type}.ndjson`).send(ndjson(byType.get(query.type)!));
    else res.type('application/zip').attachment(`${name}.zip`).send(Buffer.from(ndjsonZip(byType)));
  });
  return router;
}
