// The triage-quality report over 100,000 cases with outcomes. Target: under a second.
// Builds a temporary SQLite database through the migrations, fills it with invented cases
// (revisions evaluated by the engine, so the report's facts come from the real trigger), then
// times the report service. Run: npx tsx tests/bench/quality-report.ts [cases]
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { performance } from 'node:perf_hooks';
import { createDb, migrate } from '../../server/db';
import { buildReport } from '../../server/services/quality/report';
import type { ClinicalInput } from '../../shared/schemas/clinical';
import { ReportQuery } from '../../shared/schemas/quality';
import { evaluate, type Evaluation } from '../../shared/triage/evaluate';

const CASES = Number(process.argv[2] ?? 100_000);
const BATCH = 400;
const YEAR_START = Date.parse('2030-01-01T00:00:00Z');
const YEAR_MS = 365 * 86_400_000;

let seed = 7;
const random = () => ((seed = (seed * 1103515245 + 12345) >>> 0) / 2 ** 32);
const between = (lo: number, hi: number) => lo + Math.floor(random() * (hi - lo + 1));

/** An invented fall: mostly low falls in older people, some from height, a few in shock. */
function inventedInput(): ClinicalInput {
  const shocked = random() < 0.08;
  return {
    ageYears: random() < 0.55 ? between(65, 95) : between(5, 64),
    sex: random() < 0.5 ? 'female' : 'male',
    pregnancyWeeks: null,
    anticoagulant: random() < 0.25,
    fall: { heightM: random() < 0.5 ? 0 : between(1, 200) / 10, surface: 'concrete', firstImpact: 'side', headImpact: random() < 0.3 },
    vitals: {
      sbp: shocked ? between(60, 89) : between(100, 170), hr: between(60, 120), rr: between(12, 24), spo2: between(90, 100), spo2RoomAir: true,
      gcs: { eye: 4, verbal: random() < 0.9 ? 5 : 4, motor: 6 }, intubated: false, respiratorySupport: false, respiratoryDistress: false,
    },
    findings: random() < 0.05 ? ['pelvic-fracture'] : [],
    considerations: [],
  };
}

const POSSIBLE_ISS = [1, 2, 4, 5, 9, 10, 13, 14, 17, 18, 22, 25, 26, 29, 34, 41, 50, 75];

async function main(): Promise<void> {
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-bench-'));
  const db = createDb(join(dir, 'bench.sqlite'));
  try {
    await migrate(db);
    const at = YEAR_START;
    const [hospital] = await db('hospitals').insert({ name: 'Invented Bench Hospital', short_name: 'Bench', trauma_level: 'I', created_at: at }).returning('id');
    const agencies: number[] = [];
    for (const name of ['Invented Ambulance North', 'Invented Ambulance South', 'Invented Air Rescue']) {
      const [agency] = await db('agencies').insert({ name, created_at: at }).returning('id');
      agencies.push(agency.id);
    }
    const [user] = await db('users').insert({ email: 'bench@plumbline.test', name: 'Bench', active: true, created_at: at }).returning('id');

    const fillStarted = performance.now();
    await db.transaction(async (trx) => {
      for (let start = 0; start < CASES; start += BATCH) {
        const cases: Array<Record<string, string | number | null>> = [];
        const inputs: ClinicalInput[] = [];
        const results: Evaluation[] = [];
        for (let i = start; i < Math.min(CASES, start + BATCH); i++) {
          const input = inventedInput();
          const result = evaluate(input);
          inputs.push(input);
          results.push(result);
          const createdAt = YEAR_START + Math.floor((i / CASES) * YEAR_MS);
          const decided = random() < 0.9 ? (random() < 0.1 ? 'full' : result.activation) : null;
          cases.push({
            case_number: `B${String(i).padStart(7, '0')}`, client_id: `bench-${i}`, agency_id: agencies[i % agencies.length], hospital_id: hospital.id,
            created_by: user.id, state: 'closed', current_revision: 1, field_risk: result.fieldRisk, recommended_level: result.activation,
            decided_level: decided, policy_id: result.policy.id, policy_version: result.policy.version, created_at: createdAt, updated_at: createdAt,
          });
        }
        const ids: Array<{ id: number }> = await trx('cases').insert(cases).returning('id');
        await trx('case_revisions').insert(ids.map(({ id }, k) => ({
          case_id: id, revision: 1, input: JSON.stringify(inputs[k]), result: JSON.stringify(results[k]), criteria_set: results[k].set,
          policy_id: results[k].policy.id, policy_version: results[k].policy.version, field_risk: results[k].fieldRisk, activation: results[k].activation,
          created_by: user.id, created_at: cases[k].created_at,
        })));
        await trx('outcomes').insert(ids.map(({ id }, k) => {
          const severe = results[k].activation === 'full' ? random() < 0.5 : random() < 0.06;
          const iss = severe ? POSSIBLE_ISS[between(8, POSSIBLE_ISS.length - 1)] : POSSIBLE_ISS[between(0, 7)];
          return { case_id: id, iss, nfti_positive: severe ? random() < 0.8 : random() < 0.03, nfti_known: '[]', imported_at: at, batch: 'bench' };
        }));
      }
    });
    const fillMs = Math.round(performance.now() - fillStarted);

    const query = ReportQuery.parse({ hospitalId: hospital.id, from: '2030-01-01', to: '2030-12-31', timeZone: 'Europe/London' });
    const runs: number[] = [];
    let cases = 0;
    for (let run = 0; run < 5; run++) {
      const started = performance.now();
      const report = await buildReport(db, query, Date.now());
      runs.push(Math.round(performance.now() - started));
      cases = report.withOutcome;
      if (run === 0 && report.cases !== CASES) throw new Error(`expected ${CASES} cases, the report counted ${report.cases}`);
    }
    const ms = Math.max(...runs.slice(1));
    console.log(JSON.stringify({ cases, ms, firstRunMs: runs[0], runsMs: runs, fillMs, underASecond: ms < 1000 }));
    if (ms >= 1000) process.exitCode = 1;
  } finally {
    await db.destroy();
    rmSync(dir, { recursive: true, force: true });
  }
}

await main();
