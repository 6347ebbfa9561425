import type { Knex } from 'knex';
import { injuryScores, nftiPositive } from '../../../shared/quality';
import type { IssRegion } from '../../../shared/quality/iss';
import type { OutcomeRecord } from '../../../shared/schemas/quality';
import type { Clock } from '../../deps';
import type { DemoIds } from './ids';
import { storeOutcomes } from '../outcomes/store';

// Invented registry outcomes for the demo's past cases, so Triage quality has a matrix to show on
// first start. Drawn from a generator seeded by the case id, so every fresh demo is the same;
// a share of them is made to disagree with the activation, as real outcomes do.

function seeded(seed: number) {
  let s = (seed * 2654435761) >>> 0 || 1;
  return () => {
    s ^= s << 13;
    s ^= s >>> 17;
    s ^= s << 5;
    return (s >>> 0) / 4294967296;
  };
}

const REGIONS: IssRegion[] = ['head-neck', 'face', 'chest', 'abdomen', 'extremities', 'external'];

/** Injuries whose score lands on the serious side of ISS 15 or well below it. */
function injuriesFor(serious: boolean, random: () => number): Array<{ region: IssRegion; ais: number }> {
  const count = serious ? 2 + Math.floor(random() * 2) : 1 + Math.floor(random() * 2);
  const out: Array<{ region: IssRegion; ais: number }> = [];
  for (let i = 0; i < count; i++) {
    const region = REGIONS[Math.floor(random() * REGIONS.length)];
    const ais = serious ? (i === 0 ? 4 : 2 + Math.floor(random() * 3)) : 1 + Math.floor(random() * 2);
    out.push({ region, ais });
  }
  return out;
}

export function inventedOutcome(caseId: number, caseNumber: string, level: string): OutcomeRecord {
  const random = seeded(caseId);
  // Most full activations are major trauma, a few lower-level ones are too: both triage errors appear.
  const chance = level === 'full' ? 0.6 : level === 'limited' ? 0.25 : level === 'consult' ? 0.08 : 0.03;
  const serious = random() < chance;
  const ais = injuriesFor(serious, random);
  const { iss, niss } = injuryScores(ais);
  const icu = serious && random() < 0.7;
  return {
    caseNumber, iss, niss, ais,
    redCellsWithin4h: serious && random() < 0.4,
    minutesToOperatingRoom: serious && random() < 0.35 ? 40 + Math.floor(random() * 80) : null,
    minutesToInterventionalRadiology: serious && random() < 0.1 ? 120 : null,
    icuDays: icu ? 1 + Math.floor(random() * 6) : null,
    hoursToVentilation: serious && random() < 0.3 ? Math.floor(random() * 24) : null,
    hoursToDeath: serious && random() < 0.05 ? 30 : null,
    nftiGiven: null,
    nftiPositive: null,
    disposition: icu ? 'icu' : serious ? 'ward' : random() < 0.7 ? 'home' : 'ward',
  };
}

/** Outcomes for the demo's arrived and closed cases that have none yet; nothing when there are none. */
export async function seedDemoOutcomes(db: Knex, ids: DemoIds, clock: Clock): Promise<void> {
  const cases = await db('cases as c')
    .leftJoin('outcomes as o', 'o.case_id', 'c.id')
    .whereIn('c.state', ['closed', 'arrived'])
    .whereNull('o.case_id')
    .orderBy('c.id')
    .select('c.id', 'c.case_number', 'c.recommended_level', 'c.decided_level');
  if (!cases.length) return;
  const rows = cases.map((c) => {
    const record = inventedOutcome(c.id, c.case_number, c.decided_level ?? c.recommended_level);
    record.nftiPositive = nftiPositive(record);
    return { caseId: c.id as number, record };
  });
  const quality = ids.users['quality@plumbline.test'] ?? null;
  await storeOutcomes(db, { id: quality, role: 'quality' }, rows, clock.now(), 'demo');
}
