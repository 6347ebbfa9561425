import { once } from 'node:events';
import { stat } from 'node:fs/promises';
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
 *
 * The thread runs only while there is something to copy. A quiet server (a night with no
 * pre-alert, a region's standby) holds no thread, no second connection and no second heap:
 * about 9 MB of resident memory. The log's modification time, read off the event loop every
 * `everyMs`, says a commit happened; the thread starts then, and stops once it has copied the
 * whole log and no commit has come for `restAfterMs`. Until it is up, the log only grows.
 */
export interface Checkpoints {
  /** Stops the thread if it runs and the watch, and lets commits checkpoint again. */
  stop(): Promise<void>;
  /** Asks for a checkpoint now, starting the thread if needed; resolves with its result (for tests). */
  now(): Promise<CheckpointResult>;
  /** Whether the thread runs now (for tests). */
  readonly running: boolean;
}

export type CheckpointResult = { kind: 'checkpointed'; busy: number; log: number; checkpointed: number } | { kind: 'failed'; message: string };

const SQLITE_DEFAULT_AUTOCHECKPOINT = 1000;

/**
 * Called before the server listens: the start's own writes are copied into the file here, on
 * the one connection, while no request can wait behind it. From then on the commits only append.
 */
export async function startCheckpoints(db: Knex, filename: string, logger: Logger, opts: { everyMs?: number; restAfterMs?: number } = {}): Promise<Checkpoints | null> {
  const everyMs = opts.everyMs ?? 1000;
  const restAfterMs = opts.restAfterMs ?? 30_000;
  // PostgreSQL checkpoints by itself, off the committing backends; there is nothing to move.
  if (isPostgres(db) || filename === ':memory:' || filename === '') return null;
  const [mode] = (await db.raw('PRAGMA journal_mode')) as Array<{ journal_mode: string }>;
  if (mode?.journal_mode !== 'wal') return null;
  await db.raw('PRAGMA wal_autocheckpoint = 0');
  await db.raw('PRAGMA wal_checkpoint(TRUNCATE)');
  const logFile = `${filename}-wal`;
  const logTime = () => stat(logFile).then((log) => log.mtimeMs, () => -1);

  let stopping = false;
  let worker: Worker | null = null;
  let starting: Promise<Worker | null> | null = null;
  const resting = new WeakSet<Worker>();
  let logSeen = await logTime();
  let lastWriteAt = Date.now();
  let lastResult: CheckpointResult | null = null;
  const waiting: Array<(result: CheckpointResult) => void> = [];

  /** The commits checkpoint by themselves again: the thread failed, or the server stops. */
  async function handBack(): Promise<void> {
    clearInterval(watch);
    await db.raw(`PRAGMA wal_autocheckpoint = ${SQLITE_DEFAULT_AUTOCHECKPOINT}`).catch(() => {});
  }

  function startThread(): Promise<Worker | null> {
    starting ??= (async () => {
      // A small heap: the thread holds one connection and a timer (measured with 1,000 sockets).
      const thread = new Worker(new URL('./checkpoint-worker.mjs', import.meta.url), { workerData: { filename, everyMs }, resourceLimits: { maxYoungGenerationSizeMb: 1, maxOldGenerationSizeMb: 16 } });
      // The thread never keeps the process alive by itself.
      thread.unref();
      thread.on('message', (result: CheckpointResult) => {
        if (result.kind === 'failed') logger.warn({ reason: result.message }, 'a background WAL checkpoint failed; the next one tries again');
        lastResult = result;
        waiting.shift()?.(result);
      });
      thread.on('error', (err) => logger.error({ err }, 'the WAL checkpoint thread failed'));
      thread.on('exit', () => {
        if (worker === thread) worker = null;
        if (stopping || resting.has(thread)) return;
        logger.warn('the WAL checkpoint thread stopped; commits checkpoint by themselves again');
        stopping = true;
        void handBack();
      });
      try {
        await once(thread, 'online');
      } catch {
        return null;
      }
      // A stop that came while the thread was starting finds no running thread: stop it here.
      if (stopping) {
        await rest(thread);
        return null;
      }
      worker = thread;
      return thread;
    })().finally(() => (starting = null));
    return starting;
  }

  async function rest(thread: Worker): Promise<void> {
    resting.add(thread);
    const exited = once(thread, 'exit');
    thread.postMessage('stop');
    await exited;
  }

  // Every `everyMs`, off the event loop: did a commit reach the log since the last look?
  const watch = setInterval(() => {
    void logTime().then((mtime) => {
      if (stopping) return;
      if (mtime !== logSeen) {
        logSeen = mtime;
        lastWriteAt = Date.now();
        if (!worker) void startThread();
        return;
      }
      const copiedAll = lastResult?.kind === 'checkpointed' && lastResult.busy === 0 && lastResult.checkpointed === lastResult.log;
      if (worker && copiedAll && Date.now() - lastWriteAt >= restAfterMs && waiting.length === 0) {
        const thread = worker;
        worker = null;
        lastResult = null;
        void rest(thread);
      }
    });
  }, everyMs);
  watch.unref();

  return {
    get running() {
      return worker !== null;
    },
    async stop() {
      if (stopping) return;
      stopping = true;
      const thread = worker;
      worker = null;
      if (thread) await rest(thread);
      // A thread still starting rests itself once it is up.
      await starting;
      await handBack();
    },
    async now() {
      const thread = worker ?? (await startThread());
      if (!thread) return { kind: 'failed', message: 'the checkpoint thread did not start' };
      return new Promise((resolve) => {
        waiting.push(resolve);
        thread.postMessage('now');
      });
    },
  };
}
