// Evaluations per second on one core, timed for about a second over a fixed varied set of inputs.
// (tests/bench/engine.ts is the engine's own, longer benchmark; this is the short figure for the run.)
import { evaluate } from '../../../shared/triage/evaluate';
import type { ClinicalInput } from '../../../shared/schemas/clinical';
import { FINDINGS } from '../../../shared/schemas/clinical-options';
import { seededRandom, trafficOf } from './traffic';

const cpuMs = () => {
  const { user, system } = process.cpuUsage();
  return (user + system) / 1000;
};

export function measureEvaluateRate(budgetMs = 1000): { perSecond: number } {
  const random = seededRandom(42);
  const traffic = trafficOf(random);
  // Mostly first reports, with a share of severe patients whose criteria fire [ours].
  const inputs: ClinicalInput[] = Array.from({ length: 1024 }, (_, i) => {
    const input = traffic.firstReport();
    return i % 5 === 0 ? { ...input, vitals: { ...input.vitals, sbp: 78, gcsTotal: 8 }, findings: [traffic.pick(FINDINGS)] } : input;
  });
  let sink = 0;
  for (let i = 0; i < 100_000; i++) sink += evaluate(inputs[i & 1023], {}).criteria.length;
  let count = 0;
  const start = cpuMs();
  let elapsed = 0;
  while (elapsed < budgetMs) {
    for (let i = 0; i < 10_000; i++) sink += evaluate(inputs[(count + i) & 1023], {}).criteria.length;
    count += 10_000;
    elapsed = cpuMs() - start;
  }
  if (sink < 0) throw new Error('unreachable');
  return { perSecond: Math.round((count / elapsed) * 1000) };
}
