// The WAL checkpointer's thread (see db-checkpoints.ts). Plain JavaScript: a worker thread does
// not get the TypeScript loader the server runs under.
import { parentPort, workerData } from 'node:worker_threads';
import Database from 'better-sqlite3';

const db = new Database(workerData.filename, { fileMustExist: true });
// Never wait for the server's writes: a checkpoint that finds the log busy copies what it can.
db.pragma('busy_timeout = 0');
// A checkpoint copies pages from the log to the file; it needs no cache of its own.
db.pragma('cache_size = -256');

function checkpoint() {
  try {
    const [result] = db.pragma('wal_checkpoint(PASSIVE)');
    parentPort.postMessage({ kind: 'checkpointed', busy: result.busy, log: result.log, checkpointed: result.checkpointed });
  } catch (err) {
    parentPort.postMessage({ kind: 'failed', message: String(err?.message ?? err) });
  }
}

const timer = setInterval(checkpoint, workerData.everyMs);
parentPort.on('message', (message) => {
  if (message === 'now') checkpoint();
  if (message === 'stop') {
    clearInterval(timer);
    db.close();
    parentPort.close();
  }
});
