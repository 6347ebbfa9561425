import { Router, type RequestHandler } from 'express';
import multer from 'multer';
import { z } from 'zod';
import { DrilldownQuery, ImportRequest, OUTCOME_FILE_MAX_BYTES, ReportQuery, TargetsInput, WhatIfRequest } from '../../shared/schemas/quality';
import type { AppDeps } from '../deps';
import { requireAccess, requireUser } from '../auth/guards';
import { AppError, invalid, parseOr400 } from '../errors';
import { importOutcomes, previewOutcomes } from '../services/outcomes/import';
import { outcomeTemplateCsv } from '../services/outcomes/parse';
import { assertQualityReader, drilldown, qualityReport, qualityTargets, reportCsv, saveQualityTargets } from '../services/quality/report';
import { runWhatIf, whatIfPolicies } from '../services/quality/what-if';

export const HospitalQuery = z.object({ hospitalId: z.coerce.number({ error: 'must be a hospital number' }).int({ error: 'must be a whole number' }).positive({ error: 'must be positive' }) });
export const TargetsRequest = z.object({ hospitalId: HospitalQuery.shape.hospitalId, targets: TargetsInput });

// Spreadsheets on some systems label a .csv as Excel or plain text; the name must still end in .csv.
const CSV_TYPES = new Set(['text/csv', 'application/csv', 'text/plain', 'application/vnd.ms-excel', 'application/octet-stream', 'text/comma-separated-values']);

const upload = multer({
  storage: multer.memoryStorage(),
  limits: { fileSize: OUTCOME_FILE_MAX_BYTES, files: 1, fields: 5 },
  fileFilter: (_req, file, done) => {
    if (!/\.csv$/i.test(file.originalname) || !CSV_TYPES.has(file.mimetype)) {
      done(new AppError(415, 'not_csv', `${file.originalname} is not a CSV file; export the registry data as .csv and choose that file.`));
      return;
    }
    done(null, true);
  },
}).single('file');

/** multer's own errors, answered in our shape and naming the field. */
const csvUpload: RequestHandler = (req, res, next) =>
  upload(req, res, (err: unknown) => {
    if (!err) return next();
    if (err instanceof multer.MulterError) {
      if (err.code === 'LIMIT_FILE_SIZE') return next(new AppError(413, 'too_large', `The file is larger than ${OUTCOME_FILE_MAX_BYTES / 1024 / 1024} MB; split the export by month.`, [{ field: 'file', message: 'is too large' }]));
      return next(invalid([{ field: err.field ?? 'file', message: `${err.message}; send one CSV file in the field "file"` }]));
    }
    next(err);
  });

const needFile = (file: Express.Multer.File | undefined) => {
  if (!file) throw invalid([{ field: 'file', message: 'is missing; choose the registry CSV file' }]);
  return { originalname: file.originalname, buffer: file.buffer };
};

// The quality team and administrators import; trauma leads read. Each within their own hospitals.
export function qualityRouter({ db, clock }: AppDeps): Router {
  const router = Router();
  const user = requireUser(db);
  const readers = requireAccess('quality.read');
  const importers = requireAccess('quality.manage');

  router.get('/api/quality/outcomes/template.csv', user, readers, (_req, res) => {
    res.type('text/csv; charset=utf-8').attachment('registry-outcomes-template.csv').send(outcomeTemplateCsv());
  });
  router.post('/api/quality/outcomes/preview', user, importers, csvUpload, async (req, res) => {
    const { hospitalId } = parseOr400(ImportRequest, req.body ?? {});
    res.json(await previewOutcomes(db, req.me!, hospitalId, needFile(req.file), clock.now()));
  });
  router.post('/api/quality/outcomes/import', user, importers, csvUpload, async (req, res) => {
    const { hospitalId, token } = parseOr400(ImportRequest, req.body ?? {});
    const source = token && !req.file ? { token } : { file: needFile(req.file) };
    res.status(201).json(await importOutcomes(db, req.me!, hospitalId, source, clock.now()));
  });

  router.get('/api/quality/report', user, readers, async (req, res) => res.json(await qualityReport(db, req.me!, parseOr400(ReportQuery, req.query), clock.now())));
  router.get('/api/quality/report.csv', user, readers, async (req, res) => {
    const report = await qualityReport(db, req.me!, parseOr400(ReportQuery, req.query), clock.now());
    res.type('text/csv; charset=utf-8').attachment(`triage-quality-${report.query.from}-to-${report.query.to}.csv`).send('\uFEFF' + reportCsv(report));
  });
  router.get('/api/quality/cases', user, readers, async (req, res) => res.json(await drilldown(db, req.me!, parseOr400(DrilldownQuery, req.query))));

  router.get('/api/quality/policies', user, readers, async (req, res) => res.json({ policies: await whatIfPolicies(db, req.me!, parseOr400(HospitalQuery, req.query).hospitalId, clock.now()) }));
  router.post('/api/quality/what-if', user, readers, async (req, res) => res.json(await runWhatIf(db, req.me!, parseOr400(WhatIfRequest, req.body ?? {}), clock.now())));

  router.get('/api/quality/targets', user, readers, async (req, res) => {
    const { hospitalId } = parseOr400(HospitalQuery, req.query);
    assertQualityReader(req.me!, hospitalId);
    res.json({ targets: await qualityTargets(db, hospitalId) });
  });
  router.put('/api/quality/targets', user, importers, async (req, res) => {
    const { hospitalId, targets } = parseOr400(TargetsRequest, req.body ?? {});
    res.json({ targets: await saveQualityTargets(db, req.me!, hospitalId, targets, clock.now()) });
  });
  return router;
}
