// The real product as a separate operating-system process, exactly as `npm start` runs it, so a
// test can kill -9 it and start it again on the same port and the same SQLite file.
import { spawn, type ChildProcess } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { createServer } from 'node:net';
import { tmpdir } from 'node:os';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';

export const repoRoot = resolve(dirname(fileURLToPath(import.meta.url)), '../../..');

/** A port nobody listens on right now, on loopback; kept for every restart of one server. */
export async function freePort(): Promise<number> {
  return new Promise((resolvePort, reject) => {
    const probe = createServer();
    probe.once('error', reject);
    probe.listen(0, '127.0.0.1', () => {
      const { port } = probe.address() as { port: number };
      probe.close(() => resolvePort(port));
    });
  });
}

export function tempDataDir(prefix = 'plumbline-bench-'): string {
  const dir = mkdtempSync(join(tmpdir(), prefix));
  ownDirs.add(dir);
  return dir;
}

// Whatever happens to the benchmark, no server it started outlives it, and no temp dir stays.
const running = new Set<ChildProcess>();
const ownDirs = new Set<string>();
process.on('exit', () => {
  for (const proc of running) proc.kill('SIGKILL');
  for (const dir of ownDirs) rmSync(dir, { recursive: true, force: true });
});

/** How `npm start` runs the server: its Node flags and the C library's tunable (server/cli/bin.mjs says why). */
export const START_FLAGS = ['--max-semi-space-size=4', '--no-parallel-scavenge'];
export const START_ENV = { GLIBC_TUNABLES: 'glibc.malloc.mmap_threshold=131072' };

export const databaseFileOf = (dataDir: string) => join(dataDir, 'plumbline.sqlite');

export interface ChildServer {
  readonly url: string;
  readonly port: number;
  readonly dataDir: string;
  /** The server process's id while it runs (the node process itself, not a wrapper). */
  readonly pid: number | undefined;
  readonly starts: number;
  /** Starts (or starts again) the process and resolves once /api/health answers. */
  start(): Promise<void>;
  /** Sends the signal and resolves when the process has gone. */
  stop(signal?: NodeJS.Signals): Promise<void>;
  /** What the process wrote to stderr, for a failure message. */
  errors(): string;
  /** Stops the process if it runs and removes the data directory. */
  dispose(): Promise<void>;
}

export interface ChildServerOptions {
  dataDir?: string;
  port?: number;
  env?: Record<string, string>;
  /** How long a start may take before it counts as failed. */
  startTimeoutMs?: number;
}

export async function childServer(opts: ChildServerOptions = {}): Promise<ChildServer> {
  const dataDir = opts.dataDir ?? tempDataDir();
  const port = opts.port ?? (await freePort());
  // 127.0.0.1 everywhere: the sign-in redirects, the cookie and the socket origin must agree.
  const url = `http://127.0.0.1:${port}`;
  let child: ChildProcess | null = null;
  let exited: Promise<void> = Promise.resolve();
  let stderr = '';
  let starts = 0;

  async function waitHealthy(deadline: number): Promise<void> {
    for (;;) {
      if (!child || child.exitCode !== null || child.signalCode !== null) {
        throw new Error(`the server exited during start (code ${child?.exitCode}, signal ${child?.signalCode}):\n${stderr.slice(-2000)}`);
      }
      try {
        const res = await fetch(`${url}/api/health`, { signal: AbortSignal.timeout(1000) });
        if (res.ok) return;
      } catch {
        // Not listening yet.
      }
      if (Date.now() > deadline) throw new Error(`the server did not answer /api/health in time:\n${stderr.slice(-2000)}`);
      await new Promise((r) => setTimeout(r, 100));
    }
  }

  const server: ChildServer = {
    url,
    port,
    dataDir,
    get pid() {
      return child?.pid;
    },
    get starts() {
      return starts;
    },
    async start() {
      if (child && child.exitCode === null && child.signalCode === null) throw new Error('the server is already running');
      const proc = spawn(process.execPath, [...START_FLAGS, join(repoRoot, 'server/cli/bin.mjs'), 'start'], {
        cwd: repoRoot,
        env: {
          ...process.env,
          ...START_ENV,
          NODE_ENV: 'production',
          PORT: String(port),
          HOST: '127.0.0.1',
          PUBLIC_URL: url,
          DATA_DIR: dataDir,
          LOG_LEVEL: 'warn',
          SEED_DEMO: 'true',
          SMTP_URL: '',
          OIDC_ISSUER: '',
          ...opts.env,
        },
        stdio: ['ignore', 'ignore', 'pipe'],
      });
      child = proc;
      running.add(proc);
      starts++;
      proc.stderr!.setEncoding('utf8');
      proc.stderr!.on('data', (chunk: string) => {
        stderr = (stderr + chunk).slice(-20_000);
      });
      exited = new Promise((r) =>
        proc.once('exit', () => {
          running.delete(proc);
          r();
        }),
      );
      await waitHealthy(Date.now() + (opts.startTimeoutMs ?? 60_000));
    },
    async stop(signal = 'SIGTERM') {
      const proc = child;
      if (!proc || proc.exitCode !== null || proc.signalCode !== null) return;
      proc.kill(signal);
      const timer = setTimeout(() => proc.kill('SIGKILL'), 15_000);
      await exited;
      clearTimeout(timer);
    },
    errors: () => stderr,
    async dispose() {
      await server.stop('SIGKILL');
      rmSync(dataDir, { recursive: true, force: true });
    },
  };
  return server;
}

/** Resident memory of a process in MB, from the kernel's own account of it. */
export function residentMb(pid: number): number {
  const status = readFileSync(`/proc/${pid}/status`, 'utf8');
  const kb = Number(/^VmRSS:\s+(\d+)\s+kB/m.exec(status)?.[1]);
  if (!Number.isFinite(kb)) throw new Error(`no VmRSS for process ${pid}`);
  return kb / 1024;
}
