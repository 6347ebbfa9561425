import { mkdtempSync, readFileSync, rmSync, statSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import pino from 'pino';
import { afterEach, describe, expect, it } from 'vitest';
import { createDb, type Db } from '../../../server/db';
import { startCheckpoints } from '../../../server/db-checkpoints';
import { until } from '../../support/until';

const quiet = pino({ level: 'silent' });
let dir: string;
let db: Db;

async function openDb(): Promise<string> {
  dir = mkdtempSync(join(tmpdir(), 'plumbline-checkpoints-'));
  const file = join(dir, 'test.sqlite');
  db = createDb(file);
  await db.schema.createTable('notes', (t) => {
    t.increments('id');
    t.text('body').notNullable().index();
  });
  return file;
}

const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

const autocheckpoint = async () => ((await db.raw('PRAGMA wal_autocheckpoint')) as Array<{ wal_autocheckpoint: number }>)[0].wal_autocheckpoint;

afterEach(async () => {
  await db?.destroy();
  if (dir) rmSync(dir, { recursive: true, force: true });
});

describe('WAL checkpoints off the event loop', () => {
  it('turn the commits’ own checkpoints off while the thread runs, and back on when it stops', async () => {
    const file = await openDb();
    expect(await autocheckpoint()).toBe(1000); // SQLite's default [SQLite docs, PRAGMA wal_autocheckpoint]
    const checkpoints = (await startCheckpoints(db, file, quiet, { everyMs: 60_000 }))!;
    expect(await autocheckpoint()).toBe(0);
    await checkpoints.stop();
    expect(await autocheckpoint()).toBe(1000);
  });

  it('copy the log into the database file from the other thread, while the writes go on', async () => {
    const file = await openDb();
    const checkpoints = (await startCheckpoints(db, file, quiet, { everyMs: 60_000 }))!;
    try {
      const before = statSync(file).size;
      // About 1,200 pages of log: past the point where a commit would have checkpointed by itself.
      for (let i = 0; i < 60; i++) await db('notes').insert(Array.from({ length: 40 }, (_, k) => ({ body: `${i}-${k} ${'x'.repeat(1800)}` })));
      expect(statSync(`${file}-wal`).size).toBeGreaterThan(1000 * 4096);
      // Nothing was copied by the commits themselves.
      expect(statSync(file).size).toBe(before);
      const result = await checkpoints.now();
      expect(result.kind).toBe('checkpointed');
      if (result.kind !== 'checkpointed') return;
      expect(result.log).toBeGreaterThan(1000);
      expect(result.checkpointed).toBe(result.log);
      expect(statSync(file).size).toBeGreaterThan(before + 2400 * 1800);
      expect((await db('notes').count({ n: '*' }))[0].n).toBe(2400);
    } finally {
      await checkpoints.stop();
    }
  });

  it('run a thread only while there is something to copy: none when quiet, one after a commit, none again once all is copied', async () => {
    const file = await openDb();
    // The start's own writes (the table above) are copied at once, before the server listens.
    const checkpoints = (await startCheckpoints(db, file, quiet, { everyMs: 40, restAfterMs: 400 }))!;
    try {
      expect(statSync(`${file}-wal`).size).toBe(0);
      await sleep(300);
      expect(checkpoints.running).toBe(false);

      const before = statSync(file).size;
      await db('notes').insert(Array.from({ length: 40 }, (_, k) => ({ body: `${k} ${'x'.repeat(1800)}` })));
      expect(statSync(file).size).toBe(before); // the commit itself copied nothing
      await until(() => checkpoints.running, Boolean); // the thread starts after a commit
      // Copied by the thread, then it rests once no commit has come for restAfterMs.
      await until(() => checkpoints.running, (running) => !running);
      expect(statSync(file).size).toBeGreaterThan(before + 40 * 1800);

      // Commits go on while it rests, and the next one wakes it again.
      await db('notes').insert({ body: 'later' });
      await until(() => checkpoints.running, Boolean);
      expect((await db('notes').count({ n: '*' }))[0].n).toBe(41);
    } finally {
      await checkpoints.stop();
    }
    expect(checkpoints.running).toBe(false);
    expect(await autocheckpoint()).toBe(1000);
  });

  it('leave no thread behind when the stop comes while the thread is starting', async () => {
    const file = await openDb();
    const threads = () => Number(/^Threads:\s+(\d+)/m.exec(readFileSync('/proc/self/status', 'utf8'))?.[1]);
    const before = threads();
    const checkpoints = (await startCheckpoints(db, file, quiet, { everyMs: 60_000 }))!;
    const asked = checkpoints.now(); // starts the thread
    await checkpoints.stop();
    expect(await asked).toEqual({ kind: 'failed', message: 'the checkpoint thread did not start' });
    expect(checkpoints.running).toBe(false);
    await until(threads, (n) => n <= before);
    expect(await autocheckpoint()).toBe(1000);
  });

  it('are not started for a database in memory', async () => {
    db = createDb(':memory:');
    expect(await startCheckpoints(db, ':memory:', quiet)).toBeNull();
  });
});
