import { createHash, randomBytes } from 'node:crypto';
import type { Knex } from 'knex';
import type { Me } from '../../../shared/roles';
import type { ImportIssue, ImportPreview, ImportResult } from '../../../shared/schemas/quality';
import { assertHospital, assertMay, roleFor } from '../../auth/guards';
import { AppError, notFound } from '../../errors';
import type { Actor } from '../audit/audit';
import { parseOutcomeCsv } from './parse';
import { resolveCases, saveStaged, summarise } from './store';

// The registry's outcomes come in as a CSV, are checked row by row and shown whole before
// anything is kept (the preview); the confirm checks the same file again and saves it.
// Reading is parse.ts, matching and saving store.ts.

export interface UploadedFile { originalname: string; buffer: Buffer }

// ---- Previews kept for the confirm step, in the database ----------------------------------------

const PREVIEW_TTL_MS = 15 * 60_000;
/** Previews kept at most, the oldest dropped first: each holds a file of up to 2 MB [ours]. */
const MAX_HELD = 100;
const PREVIEWS = 'outcome_import_previews';

const hashOf = (token: string) => createHash('sha256').update(token).digest('hex');

async function hold(db: Knex, entry: { userId: number; hospitalId: number; fileName: string; buffer: Buffer; expiresAt: number }, at: number): Promise<string> {
  const token = randomBytes(18).toString('base64url');
  await db.transaction(async (trx) => {
    await trx(PREVIEWS).where('expires_at', '<=', at).del();
    const kept = await trx(PREVIEWS).orderBy([{ column: 'created_at', order: 'desc' }, { column: 'token_hash' }]).offset(MAX_HELD - 1).limit(1000).pluck('token_hash');
    if (kept.length) await trx(PREVIEWS).whereIn('token_hash', kept).del();
    await trx(PREVIEWS).insert({
      token_hash: hashOf(token), user_id: entry.userId, hospital_id: entry.hospitalId, file_name: entry.fileName,
      file: entry.buffer, created_at: at, expires_at: entry.expiresAt,
    });
  });
  return token;
}

/** The previewed file of a token, or why not: gone or expired (409), or someone else's (404). */
async function heldFile(db: Knex, me: Me, hospitalId: number, token: string, at: number): Promise<UploadedFile> {
  const entry = await db(PREVIEWS).where({ token_hash: hashOf(token) }).first('user_id', 'hospital_id', 'file_name', 'file', 'expires_at');
  if (!entry || Number(entry.expires_at) <= at) {
    if (entry) await db(PREVIEWS).where({ token_hash: hashOf(token) }).del();
    throw new AppError(409, 'preview_expired', 'That preview has expired or was already saved; check the file again.');
  }
  if (entry.user_id !== me.user.id || entry.hospital_id !== hospitalId) throw notFound('That preview');
  return { originalname: entry.file_name, buffer: Buffer.from(entry.file) };
}

function importer(me: Me): Actor {
  return { id: me.user.id, role: roleFor(me, 'quality.manage') };
}

/** Checks the file and answers every problem; stores nothing but the file, for the confirm. */
export async function previewOutcomes(db: Knex, me: Me, hospitalId: number, file: UploadedFile, at: number): Promise<ImportPreview> {
  assertMay(me, 'quality.manage');
  assertHospital(me, hospitalId);
  const { rows, fileIssues } = await parseOutcomeCsv(file.buffer);
  if (fileIssues.length) return { token: null, expiresAt: null, ...summarise(file.originalname, hospitalId, [], fileIssues) };
  const { preview, errors } = await resolveCases(db, hospitalId, rows);
  const summary = summarise(file.originalname, hospitalId, preview, errors);
  if (errors.length) return { token: null, expiresAt: null, ...summary };
  const expiresAt = at + PREVIEW_TTL_MS;
  const token = await hold(db, { userId: me.user.id, hospitalId, fileName: file.originalname, buffer: file.buffer, expiresAt }, at);
  return { token, expiresAt, ...summary };
}

// One import per hospital at a time in this process, so what a staged row says it replaces is
// still there at the move.
const importing = new Set<number>();

/**
 * Saves a previewed file (by its token) or a file sent again. Everything is checked again
 * before saving; one bad row and nothing is saved.
 */
export async function importOutcomes(db: Knex, me: Me, hospitalId: number, source: { token: string } | { file: UploadedFile }, at: number): Promise<ImportResult> {
  assertMay(me, 'quality.manage');
  assertHospital(me, hospitalId);
  const file = 'token' in source ? await heldFile(db, me, hospitalId, source.token, at) : source.file;
  if (importing.has(hospitalId)) throw new AppError(409, 'import_running', 'Another outcomes import for this hospital is being saved; try again when it has finished.');
  importing.add(hospitalId);
  try {
    const { rows, fileIssues } = await parseOutcomeCsv(file.buffer);
    if (fileIssues.length) throw rowErrors(fileIssues);
    const batch = `imp-${at.toString(36)}-${randomBytes(3).toString('hex')}`;
    const { preview, errors } = await resolveCases(db, hospitalId, rows);
    if (errors.length) throw rowErrors(errors);
    const good = preview.map((r) => ({ caseId: r.caseId!, record: r.record! }));
    const result = await saveStaged(db, importer(me), good, at, batch, hospitalId);
    if ('token' in source) await db(PREVIEWS).where({ token_hash: hashOf(source.token) }).del();
    return { batch, saved: result.created + result.updated, ...result };
  } finally {
    importing.delete(hospitalId);
  }
}

function rowErrors(errors: ImportIssue[]): AppError {
  const sorted = errors.slice().sort((a, b) => a.row - b.row);
  const first = sorted[0];
  const where = (e: ImportIssue) => `row ${e.row}${e.column ? `, ${e.column}` : ''}`;
  return new AppError(
    400,
    'invalid_rows',
    `Nothing was saved: ${sorted.length} problem${sorted.length === 1 ? '' : 's'} in the file, the first at ${where(first)}: ${first.message}`,
    sorted.map((e) => ({ field: where(e), message: e.message })),
  );
}
