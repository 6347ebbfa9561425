// How quickly a stopped server answers again, and what it holds when nobody uses it: the built
// server (dist/server), started as `npm start` starts it, on a database that exists already (a
// restart after a crash or an upgrade, not the first start's demo seeding). Alone:
// `npx tsx tests/bench/startup.ts [--json]`; method in tests/bench/README.md.
import { spawn } from 'node:child_process';
import { join } from 'node:path';
import { pathToFileURL } from 'node:url';
import { freePort, repoRoot, residentMb, START_ENV, START_FLAGS, tempDataDir } from './support/child-server';
import { prepareRegion } from './support/fixtures';

export interface StartupResult {
  /** Median over the runs: from the process's start to the first answered request. */
  coldStartMs: number;
  /** Median resident memory once started and left alone for a few seconds. */
  idleRssMb: number;
  runs: Array<{ coldStartMs: number; idleRssMb: number }>;
}

const median = (values: number[]) => [...values].sort((a, b) => a - b)[Math.floor(values.length / 2)];

async function oneStart(dataDir: string): Promise<{ coldStartMs: number; idleRssMb: number }> {
  const port = await freePort();
  const url = `http://127.0.0.1:${port}`;
  const started = performance.now();
  const child = spawn(process.execPath, [...START_FLAGS, join(repoRoot, 'server/cli/bin.mjs'), 'start'], {
    cwd: repoRoot,
    env: { ...process.env, ...START_ENV, NODE_ENV: 'production', PORT: String(port), HOST: '127.0.0.1', PUBLIC_URL: url, DATA_DIR: dataDir, LOG_LEVEL: 'warn', SMTP_URL: '', OIDC_ISSUER: '' },
    stdio: ['ignore', 'ignore', 'inherit'],
  });
  try {
    let coldStartMs = NaN;
    while (Number.isNaN(coldStartMs)) {
      if (child.exitCode !== null) throw new Error(`the server exited during start (code ${child.exitCode})`);
      if (performance.now() - started > 60_000) throw new Error('the server did not answer within 60 s');
      try {
        const res = await fetch(`${url}/api/health`);
        if (res.ok) coldStartMs = performance.now() - started;
      } catch {
        await new Promise((r) => setTimeout(r, 5));
      }
    }
    // Left alone: the start's garbage collected, the timers' first rounds done.
    await new Promise((r) => setTimeout(r, 5000));
    return { coldStartMs: Math.round(coldStartMs), idleRssMb: Math.round(residentMb(child.pid!) * 10) / 10 };
  } finally {
    const gone = new Promise((r) => child.once('exit', r));
    child.kill('SIGTERM');
    await gone;
  }
}

export async function measureStartup(opts: { runs?: number; log(line: string): void }): Promise<StartupResult> {
  // The build is made (or found fresh) first: what is timed is a start, not a build.
  const { buildServer, serverBuildIsStale } = await import('../../server/cli/server-build.mjs');
  if (serverBuildIsStale()) await buildServer({ quiet: true });
  const dataDir = tempDataDir();
  await prepareRegion(dataDir, { hospitals: 1, paramedics: 1 });
  const runs = [];
  for (let i = 0; i < (opts.runs ?? 3); i++) runs.push(await oneStart(dataDir));
  const result = { coldStartMs: median(runs.map((r) => r.coldStartMs)), idleRssMb: median(runs.map((r) => r.idleRssMb)), runs };
  opts.log(`startup: first answer after ${result.coldStartMs} ms, ${result.idleRssMb} MB resident when idle (runs: ${runs.map((r) => `${r.coldStartMs} ms/${r.idleRssMb} MB`).join(', ')})`);
  return result;
}

if (process.argv[1] && import.meta.url === pathToFileURL(process.argv[1]).href) {
  const json = process.argv.includes('--json');
  const result = await measureStartup({ log: (line) => (json ? process.stderr : process.stdout).write(`${line}\n`) });
  if (json) process.stdout.write(`${JSON.stringify({ startup: result })}\n`);
}
