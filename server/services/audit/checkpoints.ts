import { createHmac, timingSafeEqual } from 'node:crypto';
import { closeSync, fsyncSync, openSync, readFileSync, writeSync } from 'node:fs';
import { join } from 'node:path';
import type { Knex } from 'knex';
import type { Logger } from 'pino';
import { auditKeyId } from '../../audit-key';
import type { Clock } from '../../deps';
import type { Mailer } from '../../mail';
import type { Job } from '../jobs/job';
import { claimPeriod, periodStart } from '../jobs/claims';
import { auditKeyOf, keyedStart, newestAuditRow } from './audit';

// A checkpoint is the chain's head (its newest row's id and hash) signed with the audit key. It
// leaves the database twice: as a line appended to a file and as an e-mail to the trauma
// programme. Someone who later cuts rows off the end of the chain, or writes a new chain (even
// with the key), cannot make the database agree with the checkpoints already sent.

export const CHECKPOINT_FILE = 'audit-checkpoints.jsonl';
export const CHECKPOINT_EVERY_MS = 60 * 60_000;
/** The hospital setting holding the trauma programme's address (a hospital's own, or product-wide). */
export const PROGRAMME_EMAIL_SETTING = 'traumaProgramme.email';

export interface Checkpoint {
  v: 1;
  at: number;
  /** The newest row when the checkpoint was taken; 0 and the genesis hash for an empty chain. */
  headId: number;
  headHash: string;
  /** Where the keyed chain starts (null while nothing keyed was written). */
  keyedFrom: number | null;
  keyId: string;
  sig: string;
}

const signed = (c: Omit<Checkpoint, 'sig'>) => JSON.stringify([c.v, c.at, c.headId, c.headHash, c.keyedFrom, c.keyId]);
const sign = (key: Buffer, c: Omit<Checkpoint, 'sig'>) => createHmac('sha256', key).update(signed(c)).digest('hex');

/** The demo's trauma programme mailbox at the county's trauma centre (invented). */
export async function seedProgrammeAddress(db: Knex, ids: { hospitals: { general: number } }): Promise<void> {
  await db('settings').insert({ hospital_id: ids.hospitals.general, key: PROGRAMME_EMAIL_SETTING, value: JSON.stringify('trauma-programme@alderwick-general.plumbline.test') });
}

export const checkpointFileOf = (dataDir: string) => join(dataDir, CHECKPOINT_FILE);

/** The trauma programme addresses of every hospital (and the product-wide one), without repeats. */
export async function programmeAddresses(db: Knex): Promise<string[]> {
  const rows = await db('settings').where({ key: PROGRAMME_EMAIL_SETTING }).select('value', 'hospital_id');
  const out = new Set<string>();
  for (const row of rows) {
    const value = JSON.parse(row.value) as unknown;
    for (const address of Array.isArray(value) ? value : [value]) if (typeof address === 'string' && address.includes('@')) out.add(address.trim());
  }
  return [...out].sort();
}

/** Takes a checkpoint now: appends it to the file (synced to disk), then mails it. */
export async function writeCheckpoint(deps: { db: Knex; clock: Clock; mailer: Mailer | null; logger?: Logger; file: string }): Promise<{ checkpoint: Checkpoint; mailedTo: string[] }> {
  const { db, clock, mailer, logger, file } = deps;
  const key = auditKeyOf(db);
  // Head and start read together, so the checkpoint names one moment of the chain.
  const { head, start } = await db.transaction(async (trx) => ({ head: await newestAuditRow(trx), start: await keyedStart(trx) }));
  const body: Omit<Checkpoint, 'sig'> = { v: 1, at: clock.now(), headId: head?.id ?? 0, headHash: head?.hash ?? '0'.repeat(64), keyedFrom: start?.keyedFrom ?? null, keyId: auditKeyId(key) };
  const checkpoint: Checkpoint = { ...body, sig: sign(key, body) };
  // Opened for appending only: what is written here is never rewritten by the product.
  const fd = openSync(file, 'a', 0o600);
  try {
    writeSync(fd, `${JSON.stringify(checkpoint)}\n`);
    fsyncSync(fd);
  } finally {
    closeSync(fd);
  }
  const to = await programmeAddresses(db);
  if (!mailer) return { checkpoint, mailedTo: [] };
  if (!to.length) {
    logger?.warn(`audit checkpoint written to the file only: no hospital has a trauma programme address (setting ${PROGRAMME_EMAIL_SETTING})`);
    return { checkpoint, mailedTo: [] };
  }
  await mailer.send({
    to,
    subject: `Plumbline audit checkpoint: row ${checkpoint.headId} at ${new Date(checkpoint.at).toISOString()}`,
    text: [
      'Keep this message. It records the newest row of the audit trail, signed with the audit key.',
      'To check the audit trail against it later, save the line below into a file and run',
      '"npx plumbline audit verify --checkpoints FILE".',
      '',
      JSON.stringify(checkpoint),
      '',
    ].join('\n'),
  });
  return { checkpoint, mailedTo: to };
}

export const CHECKPOINT_JOB = 'audit-checkpoint';

/**
 * The hourly checkpoint; a failure is logged, and the next hour tries again. Every process of a
 * region runs it; each hour's checkpoint is claimed in the database first, so one process writes
 * and mails it and the others skip that hour.
 */
export function checkpointJob(deps: { db: Knex; clock: Clock; mailer: Mailer; logger: Logger; file: string }, everyMs = CHECKPOINT_EVERY_MS): Job {
  let running: Promise<void> | null = null;
  const claimAndWrite = async () => {
    const now = deps.clock.now();
    if (!(await claimPeriod(deps.db, CHECKPOINT_JOB, periodStart(now, everyMs), now))) return null;
    return writeCheckpoint(deps);
  };
  const tick = () => {
    if (running) return;
    running = claimAndWrite()
      .then((written) => {
        if (written) deps.logger.info({ headId: written.checkpoint.headId }, 'audit checkpoint written');
      })
      .catch((err: unknown) => deps.logger.error({ err }, 'audit checkpoint failed'))
      .finally(() => (running = null));
  };
  const timer = setInterval(tick, everyMs);
  timer.unref?.();
  return {
    async stop() {
      clearInterval(timer);
      await running;
    },
  };
}

export interface CheckpointProblem { line: number; problem: string }

/**
 * Holds the database against each checkpoint line: the signature must be this key's, the
 * keyed start must not have moved, and the head row must still be there with the same hash.
 */
export async function checkCheckpoints(db: Knex, text: string): Promise<{ checked: number; problems: CheckpointProblem[] }> {
  const key = auditKeyOf(db);
  const start = await keyedStart(db);
  const newest = await newestAuditRow(db);
  const problems: CheckpointProblem[] = [];
  let checked = 0;
  const lines = text.split('\n');
  for (let i = 0; i < lines.length; i++) {
    const raw = lines[i].trim();
    if (!raw) continue;
    const line = i + 1;
    let c: Checkpoint;
    try {
      c = JSON.parse(raw) as Checkpoint;
    } catch {
      problems.push({ line, problem: 'not a checkpoint (not JSON)' });
      continue;
    }
    checked++;
    const body = { v: c.v, at: c.at, headId: c.headId, headHash: c.headHash, keyedFrom: c.keyedFrom, keyId: c.keyId } as Omit<Checkpoint, 'sig'>;
    const expected = Buffer.from(sign(key, body), 'hex');
    const given = Buffer.from(typeof c.sig === 'string' ? c.sig : '', 'hex');
    if (c.v !== 1 || given.length !== expected.length || !timingSafeEqual(given, expected)) {
      problems.push({ line, problem: 'its signature does not match this audit key (the line was changed, or made with another key)' });
      continue;
    }
    const when = new Date(c.at).toISOString();
    if ((start?.keyedFrom ?? null) !== c.keyedFrom) {
      problems.push({ line, problem: `the keyed chain started at row ${c.keyedFrom} at ${when}; it now starts at ${start?.keyedFrom ?? 'no row'} (the chain was rewritten)` });
      continue;
    }
    if (c.headId === 0) continue;
    const row = await db('audit_log').where({ id: c.headId }).first('hash');
    if (!row) {
      problems.push({ line, problem: `row ${c.headId} existed at ${when} and is gone; the chain now ends at row ${newest?.id ?? 0} (its tail was cut off)` });
    } else if (row.hash !== c.headHash) {
      problems.push({ line, problem: `row ${c.headId} had another hash at ${when} (the chain was rewritten up to it)` });
    }
  }
  return { checked, problems };
}

export const readCheckpointFile = (file: string) => readFileSync(file, 'utf8');
