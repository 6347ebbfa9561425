import type { ErrorRequestHandler, RequestHandler } from 'express';
import type { Logger } from 'pino';
import type { z } from 'zod';
import { messagePage } from './idp/pages';

const pageFor = (error: AppError) => messagePage(error.status === 404 ? 'Not found' : 'Something went wrong', error.message, { href: '/', label: 'Back to Plumbline' });

import { describeIssues, formatIssue, type FieldIssue } from '../shared/schemas/issues';
import type { CaseSummary } from '../shared/schemas/cases';

export type { FieldIssue };

/** An error whose code and message are safe to show to the user. */
export class AppError extends Error {
  constructor(
    readonly status: number,
    readonly code: string,
    message: string,
    readonly issues?: FieldIssue[],
  ) {
    super(message);
  }
}

/**
 * A refusal that carries the case as it now stands (another change came first, or the case left
 * the state the action needs): its body has the case's summary beside the error, so the caller
 * catches up from the answer instead of reading the case again.
 */
export class CaseRefusal extends AppError {
  constructor(status: number, code: string, message: string, readonly summary: CaseSummary) {
    super(status, code, message);
  }
}

export const unauthenticated = () => new AppError(401, 'unauthenticated', 'Sign in to continue.');
export const forbidden = (why = 'Your role does not allow this.') => new AppError(403, 'forbidden', why);
export const notFound = (what = 'That record') => new AppError(404, 'not_found', `${what} was not found.`);
export const conflict = (message: string) => new AppError(409, 'conflict', message);

export const zodIssues = (error: z.ZodError): FieldIssue[] => describeIssues(error);

export function invalid(issues: FieldIssue[]): AppError {
  const first = issues[0];
  const message = first ? formatIssue(first) : 'The request is not valid.';
  return new AppError(400, 'invalid', message, issues);
}

/** Parse with a shared schema or throw a 400 naming the field. */
export function parseOr400<T extends z.ZodType>(schema: T, value: unknown): z.infer<T> {
  const result = schema.safeParse(value);
  if (!result.success) throw invalid(zodIssues(result.error));
  return result.data;
}

export function errorBody(error: AppError) {
  const [first] = error.issues ?? [];
  return {
    error: { code: error.code, message: error.message, ...(first ? { field: first.field } : {}), ...(error.issues ? { issues: error.issues } : {}) },
    ...(error instanceof CaseRefusal ? { case: error.summary } : {}),
  };
}

export const notFoundHandler: RequestHandler = (_req, _res, next) => next(notFound('That address'));

export function errorHandler(logger: Logger): ErrorRequestHandler {
  return (err, req, res, _next) => {
    let error: AppError;
    if (err instanceof AppError) error = err;
    else if (err?.type === 'entity.too.large') error = new AppError(413, 'too_large', 'The request body is too large.');
    // The parser is strict: a bare string, number or null is refused here too. The whole body is the field.
    else if (err?.type === 'entity.parse.failed') error = new AppError(400, 'invalid_json', 'The request body is not valid JSON.', [{ field: '(input)', message: 'must be a JSON object or list' }]);
    else if (typeof err?.statusCode === 'number' && err.statusCode >= 400 && err.statusCode < 500 && typeof err.error === 'string') {
      // The identity provider's own errors (an expired sign-in, say) are safe to show.
      error = new AppError(err.statusCode, err.error, err.error_description ?? 'The sign-in request could not be completed.');
    } else {
      logger.error({ err, url: req.originalUrl }, 'unhandled error');
      error = new AppError(500, 'internal', 'Something went wrong on our side. It has been logged.');
    }
    if (res.headersSent) return;
    if (!req.path.startsWith('/api') && req.accepts(['json', 'html']) === 'html') {
      res.status(error.status).type('html').send(pageFor(error));
      return;
    }
    res.status(error.status).json(errorBody(error));
  };
}
