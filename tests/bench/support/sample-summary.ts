// Case summaries as the load run's boards receive them, made before the load run starts, so the
// echo can be measured before it as well as after it, carrying the same sizes.
import { join } from 'node:path';
import type { CaseSummary } from '../../../shared/schemas/cases';
import { createDb } from '../../../server/db';
import { loadMe } from '../../../server/auth/guards';
import { submitPreAlert } from '../../../server/services/cases/commands';
import { caseSummary } from '../../../server/services/cases/summary';
import { systemClock } from '../../../server/deps';
import { databaseFileOf, tempDataDir } from './child-server';
import { prepareRegion } from './fixtures';
import { seededRandom, trafficOf } from './traffic';

/** Pre-alerts of the load run's kind (its traffic, its region), stored and summarised in-process on a database of their own. */
export async function sampleCaseSummaries(seed: number, hospitals: number, count: number): Promise<CaseSummary[]> {
  const dataDir = tempDataDir();
  const region = await prepareRegion(dataDir, { hospitals, paramedics: 1 });
  const db = createDb(databaseFileOf(dataDir));
  try {
    const paramedic = (await db('users').where({ email: region.paramedicEmails[0] }).first('id')).id as number;
    const me = (await loadMe(db, paramedic))!;
    const traffic = trafficOf(seededRandom(seed));
    const summaries: CaseSummary[] = [];
    for (let i = 0; i < count; i++) {
      const payload = { clientId: crypto.randomUUID(), hospitalId: region.hospitals[i % region.hospitals.length].id, etaMinutes: traffic.between(5, 40), clinical: traffic.firstReport() };
      const { caseId } = await submitPreAlert(db, systemClock, { me, role: 'paramedic' }, payload);
      summaries.push(await caseSummary(db, caseId));
    }
    return summaries;
  } finally {
    await db.destroy();
  }
}
