// Evaluations per second on one core, timed for about a second over the engine benchmark's
// mixed traffic (tests/bench/engine.ts is the longer run of the same). The load run starts this
// as a fresh process, as the server evaluates in its own: timed inside the load run's process,
// whose heap still holds hundreds of socket clients, the figure would measure that process's
// garbage collection instead of the engine. Run alone: npx tsx tests/bench/support/evaluate-rate.ts
import { spawn } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import type { ClinicalInput } from '../../../shared/schemas/clinical';
import { evaluate } from '../../../shared/triage/evaluate';
import { repoRoot } from './child-server';
import { engineTraffic } from './engine-traffic';

const cpuMs = () => {
  const { user, system } = process.cpuUsage();
  return (user + system) / 1000;
};

export function measureEvaluateRate(budgetMs = 1000): { perSecond: number } {
  const traffic = engineTraffic();
  const inputs: ClinicalInput[] = Array.from({ length: 4096 }, traffic.mixed);
  let sink = 0;
  for (let i = 0; i < 200_000; i++) sink += evaluate(inputs[i & 4095], {}).criteria.length;
  let count = 0;
  const start = cpuMs();
  let elapsed = 0;
  while (elapsed < budgetMs) {
    for (let i = 0; i < 10_000; i++) sink += evaluate(inputs[(count + i) & 4095], {}).criteria.length;
    count += 10_000;
    elapsed = cpuMs() - start;
  }
  if (sink < 0) throw new Error('unreachable');
  return { perSecond: Math.round((count / elapsed) * 1000) };
}

/** The same measurement in a child process; null when it gives no figure within the time. */
export async function measureEvaluateRateApart(timeoutMs = 60_000): Promise<{ perSecond: number } | null> {
  const child = spawn(process.execPath, ['--import', 'tsx', fileURLToPath(import.meta.url)], { cwd: repoRoot, stdio: ['ignore', 'pipe', 'inherit'] });
  let out = '';
  child.stdout.setEncoding('utf8').on('data', (chunk: string) => (out += chunk));
  const timer = setTimeout(() => child.kill('SIGKILL'), timeoutMs);
  await new Promise((r) => child.once('exit', r));
  clearTimeout(timer);
  const line = out.trim().split('\n').reverse().find((l) => l.startsWith('{'));
  const parsed = line ? (JSON.parse(line) as { perSecond?: unknown }) : null;
  return typeof parsed?.perSecond === 'number' ? { perSecond: parsed.perSecond } : null;
}

if (process.argv[1] === fileURLToPath(import.meta.url)) console.log(JSON.stringify(measureEvaluateRate()));
