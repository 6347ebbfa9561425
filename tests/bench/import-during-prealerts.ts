// Pre-alerts while a 20,000-row outcomes import is saved: the acknowledgement time of every
// pre-alert sent from the moment the import is posted until its answer, against the real server
// in its own process. The method and its history: tests/bench/import-during-prealerts.md.
// Alone: npx tsx tests/bench/import-during-prealerts.ts [--json] [--rows N]
import { randomUUID } from 'node:crypto';
import { performance } from 'node:perf_hooks';
import { pathToFileURL } from 'node:url';
import { createDb } from '../../server/db';
import { signIn } from '../support/sign-in';
import { connectAs, type TestSocket } from '../support/socket';
import { childServer, databaseFileOf, tempDataDir } from './support/child-server';
import { addClosedCases, outcomesCsv } from './support/closed-cases';
import { prepareRegion } from './support/fixtures';
import { percentile, round1 } from './support/traffic';

export interface ImportDuringPreAlerts {
  rows: number;
  importStatus: number;
  importMs: number;
  saved: number | null;
  /** Pre-alerts sent while the import ran, and their acknowledgement times. */
  samples: number;
  refused: number;
  p50Ms: number | null;
  p99Ms: number | null;
  maxMs: number | null;
  /** The same crews' pre-alerts just before the import, for comparison. */
  beforeP99Ms: number | null;
}

// 34-year-old, SBP 84 < 90 (2021 guideline, Newgard 2022 [source]): full under the example policy.
const CLINICAL = { ageYears: 34, sex: 'male', fall: { heightM: 4 }, vitals: { sbp: 84, hr: 120 } };
/** Crew accounts, and ambulance sockets on each (a crew's devices share its session), as the load run does. */
const CREWS = 5;
const SOCKETS_PER_CREW = 4;
/** Each socket sends one pre-alert this often, without waiting for the last answer: 10 a second in all. */
const EVERY_MS = 2000;

function sendPreAlert(socket: TestSocket, hospitalId: number): Promise<{ ms: number; ok: boolean }> {
  const started = performance.now();
  return new Promise((resolve) => {
    (socket as unknown as { timeout(ms: number): { emit(e: string, p: unknown, cb: (err: Error | null, answer?: { ok: boolean }) => void): void } })
      .timeout(30_000)
      .emit('case:submit', { clientId: randomUUID(), hospitalId, etaMinutes: 12, clinical: CLINICAL }, (err, answer) => resolve({ ms: performance.now() - started, ok: !err && answer?.ok === true }));
  });
}

/** Every crew sends on its own steady clock until `until()` says stop; resolves with every answer. */
async function steadyPreAlerts(crews: TestSocket[], hospitalId: number, until: () => boolean): Promise<Array<{ ms: number; ok: boolean }>> {
  const answers: Array<Promise<{ ms: number; ok: boolean }>> = [];
  await Promise.all(
    crews.map(async (crew, k) => {
      await new Promise((r) => setTimeout(r, (k * EVERY_MS) / crews.length));
      while (!until()) {
        answers.push(sendPreAlert(crew, hospitalId));
        await new Promise((r) => setTimeout(r, EVERY_MS));
      }
    }),
  );
  return Promise.all(answers);
}

const summary = (answers: Array<{ ms: number; ok: boolean }>) => {
  const times = answers.filter((a) => a.ok).map((a) => a.ms).sort((a, b) => a - b);
  return { times, refused: answers.length - times.length, p50: times.length ? round1(percentile(times, 50)) : null, p99: times.length ? round1(percentile(times, 99)) : null, max: times.length ? round1(times.at(-1)!) : null };
};

export async function measureImportDuringPreAlerts(opts: { rows?: number; log?: (line: string) => void } = {}): Promise<ImportDuringPreAlerts> {
  const rows = opts.rows ?? 20_000;
  const log = opts.log ?? (() => {});
  const dataDir = tempDataDir();
  const region = await prepareRegion(dataDir, { hospitals: 1, paramedics: CREWS });
  const general = region.hospitals[0].id;
  const db = createDb(databaseFileOf(dataDir));
  const numbers = await addClosedCases(db, general, rows).finally(() => db.destroy());
  // Each crew account carries its four sockets' pre-alerts (120 a minute): its per-account limit
  // is raised to that with room to spare, so none is refused for the flood limit. No pre-alert
  // names a unit, so the per-unit limit does not apply.
  const perAccount = Math.ceil((SOCKETS_PER_CREW * 60_000) / EVERY_MS) * 4;
  const server = await childServer({ dataDir, env: { CREW_COMMANDS_PER_MINUTE: String(perAccount) } });
  try {
    await server.start();
    const quality = await signIn(server.url, 'quality@plumbline.test');
    const crews: TestSocket[] = [];
    for (const email of region.paramedicEmails.slice(0, CREWS)) {
      const session = await signIn(server.url, email);
      for (let i = 0; i < SOCKETS_PER_CREW; i++) crews.push(await connectAs(server.url, session));
    }

    // Warm: the first pre-alerts of a fresh process meet cold code and caches.
    await Promise.all(crews.map((crew) => sendPreAlert(crew, general)));
    const beforeEnd = performance.now() + 5000;
    const before = summary(await steadyPreAlerts(crews, general, () => performance.now() >= beforeEnd));
    log(`before the import: p99 ${before.p99} ms over ${before.times.length} pre-alerts`);

    const form = new FormData();
    form.set('hospitalId', String(general));
    form.set('file', new Blob([outcomesCsv(numbers)], { type: 'text/csv' }), 'registry.csv');
    let done = false;
    const importStarted = performance.now();
    const importing = quality
      .fetch(new URL('/api/quality/outcomes/import', server.url), { method: 'POST', body: form, headers: { origin: new URL(server.url).origin, accept: 'application/json' } })
      .then(async (res) => ({ status: res.status, body: (await res.json().catch(() => null)) as { saved?: number } | null, ms: performance.now() - importStarted }))
      .finally(() => (done = true));
    const during = summary(await steadyPreAlerts(crews, general, () => done));
    const imported = await importing;
    log(`import of ${rows} rows: HTTP ${imported.status} in ${Math.round(imported.ms)} ms; pre-alerts meanwhile p50 ${during.p50} ms, p99 ${during.p99} ms, max ${during.max} ms over ${during.times.length} (${during.refused} refused)`);
    for (const crew of crews) crew.close();
    return {
      rows, importStatus: imported.status, importMs: Math.round(imported.ms), saved: imported.body?.saved ?? null,
      samples: during.times.length, refused: during.refused, p50Ms: during.p50, p99Ms: during.p99, maxMs: during.max, beforeP99Ms: before.p99,
    };
  } finally {
    await server.dispose();
  }
}

if (import.meta.url === pathToFileURL(process.argv[1] ?? '').href) {
  const json = process.argv.includes('--json');
  const rowsArg = process.argv.indexOf('--rows');
  const rows = rowsArg > 0 ? Number(process.argv[rowsArg + 1]) : undefined;
  measureImportDuringPreAlerts({ rows, log: (line) => process.stderr.write(`${line}\n`) }).then(
    (result) => {
      process.stdout.write(json ? `${JSON.stringify(result)}\n` : `${JSON.stringify(result, null, 2)}\n`);
      process.exit(0);
    },
    (err) => {
      process.stderr.write(`bench failed: ${(err as Error)?.stack ?? err}\n`);
      process.exit(1);
    },
  );
}
