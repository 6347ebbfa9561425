import { once } from 'node:events';
import { Worker } from 'node:worker_threads';
import type { Knex } from 'knex';
import type { Logger } from 'pino';
import { isPostgres } from './db';

/**
 * SQLite in WAL mode copies the log back into the database file every 1,000 pages. It does so
 * inside whichever commit crosses the mark, and the copy ends with two fsyncs. On the server
 * that commit is a pre-alert's. Under the load benchmark, 11 of 456 commits took 3–17 ms
 * instead of the usual 0.12 ms, and each one held every board's update behind it.
 *
 * Here the server's own commits never checkpoint. A worker thread with its own connection does
 * it every `everyMs`, PASSIVE: it never waits for the server's writes, nor blocks them. If that
 * thread stops, commits checkpoint again as they did before. Durability is unchanged: a commit
 * is in the log before it is acknowledged, and the log is what recovery reads.
 */
export interface Checkpoints {
  /** Stops the thread, and lets commits checkpoint again. */
  stop(): Promise<void>;
  /** Asks for a checkpoint now; resolves with the next checkpoint's result (for tests). */
  now(): Promise<CheckpointResult>;
}

export type CheckpointResult = { kind: 'checkpointed'; busy: number; log: number; checkpointed: number } | { kind: 'failed'; message: string };

const SQLITE_DEFAULT_AUTOCHECKPOINT = 1000;

export async function startCheckpoints(db: Knex, filename: string, logger: Logger, everyMs = 1000): Promise<Checkpoints | null> {
  // PostgreSQL checkpoints by itself, off the committing backends; there is nothing to move.
  if (isPostgres(db) || filename === ':memory:' || filename === '') return null;
  const [mode] = (await db.raw('PRAGMA journal_mode')) as Array<{ journal_mode: string }>;
  if (mode?.journal_mode !== 'wal') return null;

  // A small heap: the thread holds one connection and a timer (measured with 1,000 sockets).
  const worker = new Worker(new URL('./checkpoint-worker.mjs', import.meta.url), { workerData: { filename, everyMs }, resourceLimits: { maxYoungGenerationSizeMb: 1, maxOldGenerationSizeMb: 16 } });
  // The thread never keeps the process alive by itself.
  worker.unref();
  await once(worker, 'online');
  await db.raw('PRAGMA wal_autocheckpoint = 0');

  let stopping = false;
  const waiting: Array<(result: CheckpointResult) => void> = [];
  worker.on('message', (result: CheckpointResult) => {
    if (result.kind === 'failed') logger.warn({ reason: result.message }, 'a background WAL checkpoint failed; the next one tries again');
    waiting.shift()?.(result);
  });
  worker.on('error', (err) => logger.error({ err }, 'the WAL checkpoint thread failed'));
  worker.on('exit', () => {
    if (stopping) return;
    logger.warn('the WAL checkpoint thread stopped; commits checkpoint by themselves again');
    void db.raw(`PRAGMA wal_autocheckpoint = ${SQLITE_DEFAULT_AUTOCHECKPOINT}`).catch(() => {});
  });

  return {
    async stop() {
      if (stopping) return;
      stopping = true;
      const exited = once(worker, 'exit');
      worker.postMessage('stop');
      await exited;
      await db.raw(`PRAGMA wal_autocheckpoint = ${SQLITE_DEFAULT_AUTOCHECKPOINT}`);
    },
    now() {
      return new Promise((resolve) => {
        waiting.push(resolve);
        worker.postMessage('now');
      });
    },
  };
}
