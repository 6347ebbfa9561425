import { randomBytes } from 'node:crypto';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createDb, migrate, type Db } from '../../server/db';
import { appendAudit, appendAudits, systemActor, verifyAuditChain } from '../../server/services/audit/audit';
import { createTestDatabase, onPostgres, type TestDatabase } from '../support/database';

// Several server processes on one PostgreSQL: each appends to the audit chain from its own pool
// of connections. The append is serialised until commit, so the chain links in one line and a
// row's id never becomes visible before a smaller one (the boards' changes-since cursor).

const WRITERS_PER_POOL = 40;
const APPENDS_PER_WRITER = 5;
const pause = (ms: number) => new Promise((r) => setTimeout(r, ms));

let database: TestDatabase;
let first: Db;
let second: Db;

describe.skipIf(!onPostgres)('the audit chain with two pools writing at once (PostgreSQL)', () => {
  beforeAll(async () => {
    database = await createTestDatabase();
    const auditKey = randomBytes(32);
    first = createDb(database.url, { auditKey });
    second = createDb(database.url, { auditKey });
    await migrate(first);
  });

  afterAll(async () => {
    await first?.destroy();
    await second?.destroy();
    await database?.drop();
  });

  it('keeps one chain, with ids visible only in order, while 80 transactions append and linger before commit', async () => {
    // A reader polling as the boards' cursor does: the rows it sees must always be 1..max, no gap
    // that a slower commit fills in later (no append here rolls back, so the ids have no holes).
    const gaps: string[] = [];
    let reads = 0;
    let writing = true;
    const reader = (async () => {
      while (writing) {
        const row = await second('audit_log').first(second.raw('count(*) AS n'), second.raw('max(id) AS top'));
        reads++;
        if (row && Number(row.n) !== Number(row.top ?? 0)) gaps.push(`${row.n} rows visible up to id ${row.top}`);
        await pause(1);
      }
    })();

    const writer = async (db: Db, w: number) => {
      for (let i = 0; i < APPENDS_PER_WRITER; i++) {
        await db.transaction(async (trx) => {
          // Other work in the same transaction, before and after the append, as a case change does.
          await pause(Math.random() * 3);
          if (i % 2) await appendAudits(trx, [0, 1].map((k) => ({ at: Date.now(), actor: systemActor, action: 'test.pair', entity: 'audit', entityId: `${w}.${i}.${k}` })));
          else await appendAudit(trx, { at: Date.now(), actor: systemActor, action: 'test.one', entity: 'audit', entityId: `${w}.${i}` });
          await pause(Math.random() * 3);
        });
      }
    };
    await Promise.all(Array.from({ length: WRITERS_PER_POOL * 2 }, (_, w) => writer(w % 2 ? second : first, w)));
    writing = false;
    await reader;

    const rows = Number((await first('audit_log').count({ n: '*' }).first())?.n);
    // Half the transactions append one row, half a pair.
    expect(rows).toBe(WRITERS_PER_POOL * 2 * (Math.ceil(APPENDS_PER_WRITER / 2) + Math.floor(APPENDS_PER_WRITER / 2) * 2));
    expect(reads).toBeGreaterThan(0);
    expect(gaps).toEqual([]);
    expect(await verifyAuditChain(first)).toEqual({ ok: true, rows, keyedFrom: 1 });
    expect(await verifyAuditChain(second)).toEqual({ ok: true, rows, keyedFrom: 1 });
  });

  it('serialises an append made outside a transaction too', async () => {
    const before = Number((await first('audit_log').count({ n: '*' }).first())?.n);
    await Promise.all(Array.from({ length: 20 }, (_, i) => appendAudit(i % 2 ? first : second, { at: Date.now(), actor: systemActor, action: 'test.bare', entity: 'audit', entityId: i })));
    const check = await verifyAuditChain(first);
    expect(check).toEqual({ ok: true, rows: before + 20, keyedFrom: 1 });
  });
});
