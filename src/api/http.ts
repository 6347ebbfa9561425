// The only module that reaches the network; every other client file goes through these helpers
// so that credentials, headers and error shapes stay the same everywhere.

export interface ApiIssue {
  field: string;
  message: string;
}

/** The server's error body: `{ error: { code, message, field?, issues? } }`. */
interface ApiErrorBody {
  error: {
    code: string;
    message: string;
    field?: string;
    issues?: ApiIssue[];
  };
}

export class ApiError extends Error {
  readonly status: number;
  readonly code: string;
  readonly field?: string;
  readonly issues: ApiIssue[];
  /** The whole answer as the server sent it: a refusal may carry more than the error (a 409 on a case carries the case as it stands). */
  readonly body: unknown;

  constructor(status: number, code: string, message: string, field?: string, issues: ApiIssue[] = [], body?: unknown) {
    super(message);
    this.name = 'ApiError';
    this.status = status;
    this.code = code;
    this.field = field;
    this.issues = issues;
    this.body = body;
  }
}

export type SendMethod = 'POST' | 'PUT' | 'PATCH' | 'DELETE';

export function apiGet<T>(path: string): Promise<T> {
  return request<T>('GET', path);
}

export function apiSend<T>(method: SendMethod, path: string, body?: unknown): Promise<T> {
  return request<T>(method, path, body);
}

/** A multipart form, e.g. a file upload; the browser writes the Content-Type with its boundary. */
export function apiUpload<T>(path: string, form: FormData): Promise<T> {
  return request<T>('POST', path, form);
}

async function request<T>(method: 'GET' | SendMethod, path: string, body?: unknown): Promise<T> {
  // Relative paths only: the API is same-origin, and the CSP would refuse anything else anyway.
  if (!path.startsWith('/')) throw new TypeError(`API path must start with "/": ${path}`);

  const headers: Record<string, string> = { Accept: 'application/json' };
  const init: RequestInit = { method, headers, credentials: 'same-origin' };
  if (body instanceof FormData) {
    init.body = body;
  } else if (body !== undefined) {
    headers['Content-Type'] = 'application/json';
    init.body = JSON.stringify(body);
  }

  let response: Response;
  try {
    response = await fetch(path, init);
  } catch {
    // fetch rejects only when no response came back at all (offline, DNS, connection reset).
    throw new ApiError(0, 'network_unreachable', 'The Plumbline server could not be reached.');
  }

  const payload = await readJson(response);
  if (!response.ok) throw toApiError(response.status, payload);
  return payload as T;
}

async function readJson(response: Response): Promise<unknown> {
  if (response.status === 204) return undefined;
  const text = await response.text();
  if (text === '') return undefined;
  try {
    return JSON.parse(text);
  } catch {
    // A proxy's HTML error page is not our JSON; keep the status and say so plainly.
    return undefined;
  }
}

function toApiError(status: number, payload: unknown): ApiError {
  if (isErrorBody(payload)) {
    const { code, message, field, issues } = payload.error;
    return new ApiError(status, code, message, field, Array.isArray(issues) ? issues : [], payload);
  }
  return new ApiError(status, 'unexpected_response', `The server answered ${status} without an error description.`, undefined, [], payload);
}

function isErrorBody(payload: unknown): payload is ApiErrorBody {
  if (typeof payload !== 'object' || payload === null || !('error' in payload)) return false;
  const error = (payload as { error: unknown }).error;
  return (
    typeof error === 'object' &&
    error !== null &&
    typeof (error as { code?: unknown }).code === 'string' &&
    typeof (error as { message?: unknown }).message === 'string'
  );
}
