import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { loadConfig, type Config } from '../../server/config';
import { startServer, type RunningServer, type StartOptions } from '../../server/server';
import { createTestDatabase, onPostgres } from './database';

export interface TestServer extends RunningServer { dataDir: string; config: Config }

/**
 * The real product on an ephemeral port with a temporary SQLite file and the demo scenario (in
 * the PostgreSQL pass, a new database on the TEST_DATABASE_URL server, dropped at close).
 * Its timed jobs are off unless asked for, so the demo's live cases do not turn overdue (and
 * change) in the middle of a test; escalation tests run the job themselves on a fake clock.
 */
export async function startTestServer(overrides: Partial<Config> = {}, opts: StartOptions = {}): Promise<TestServer> {
  const dataDir = mkdtempSync(join(tmpdir(), 'plumbline-test-'));
  const database = onPostgres && !opts.db && overrides.databaseUrl === undefined ? await createTestDatabase() : null;
  const config = loadConfig({ NODE_ENV: 'test' }, { port: 0, host: '127.0.0.1', dataDir, logLevel: 'silent', ...(database ? { databaseUrl: database.url } : {}), ...overrides });
  let server: RunningServer;
  try {
    server = await startServer(config, { backgroundJobs: false, ...opts });
  } catch (err) {
    await database?.drop();
    rmSync(dataDir, { recursive: true, force: true });
    throw err;
  }
  return {
    ...server,
    dataDir,
    config,
    async close(withinMs?: number) {
      const left = await server.close(withinMs);
      await database?.drop();
      rmSync(dataDir, { recursive: true, force: true });
      return left;
    },
  };
}
