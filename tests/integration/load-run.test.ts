// The load benchmark's own counting, on a small run: the numbers `npm run bench` prints are only
// as good as the harness that counts them. Two restarts of the real server process (kill -9 and
// SIGTERM) and dropped links, as in the full run, at a tenth of its size.
import { describe, expect, it } from 'vitest';
import { runLoad } from '../bench/load';
import { redisUnavailable, testRedisPrefix, testRedisUrl } from '../support/redis';

const noRedis = await redisUnavailable();
if (noRedis) console.warn(`load-run.test.ts: the two-process run is skipped: ${noRedis}`);

describe('a small load run through a kill -9 and a restart', () => {
  it('counts every acknowledged pre-alert on every board of its ED, none lost or doubled, and times the clean ones', async () => {
    const run = await runLoad({ ambulances: 12, boards: 4, hospitals: 2, crewSessions: 2, alerts: 60, updates: 12, sendsPerSecond: 20, warmUpMs: 500, settleMs: 30_000 });
    expect(run.restartKinds).toEqual(['SIGKILL', 'SIGTERM']);
    expect([run.boards, run.hospitals, run.alerts]).toEqual([4, 2, 60]);
    // An update waits for an acknowledged case on a connected ambulance; a short run with two restarts sends fewer.
    expect(run.updates).toBeGreaterThan(0);
    expect(run.updates).toBeLessThanOrEqual(12);
    expect({ acknowledged: run.acknowledged, delivered: run.delivered, lost: run.lost, duplicated: run.duplicated, missing: run.missingInDatabase, foreign: run.foreignDeliveries }).toEqual({ acknowledged: 60, delivered: 60, lost: 0, duplicated: 0, missing: 0, foreign: 0 });
    expect(run.updatesAcknowledged + run.updatesRefused).toBeLessThanOrEqual(run.updates);
    expect(run.updatesRefused).toBe(0);
    expect(run.updatesLost).toBe(0);
    expect(run.auditChain.ok).toBe(true);
    // A clean pre-alert is one sample per board of its ED (two each) that saw it live; in so short
    // a run most are sent while the server is away, and are timed apart once their outbox empties.
    expect(run.latencySamples).toBeGreaterThan(0);
    expect(run.outbox.samples).toBeGreaterThan(0);
    expect(run.latencySamples + run.outbox.samples).toBeLessThanOrEqual(2 * 60);
    expect(run.p50Ms).toBeGreaterThan(0);
    // Sends and sightings are stamped on two threads: on one shared clock no sample can exceed the acknowledgement timeout.
    expect(run.p99Ms!).toBeLessThan(10_000);
  }, 120_000);
});

describe.skipIf(Boolean(noRedis))('the same small run on two processes behind a relay (npm run bench -- --cluster)', () => {
  it('loses and doubles nothing while each process is killed or restarted once, and times the clean ones', async () => {
    const run = await runLoad({ ambulances: 12, boards: 4, hospitals: 2, crewSessions: 2, alerts: 60, updates: 12, sendsPerSecond: 20, warmUpMs: 500, settleMs: 30_000, cluster: { redisUrl: testRedisUrl, redisPrefix: testRedisPrefix() } });
    expect(run.processes).toBe(2);
    expect(run.restartKinds).toEqual(['SIGKILL', 'SIGTERM']);
    expect({ acknowledged: run.acknowledged, delivered: run.delivered, lost: run.lost, duplicated: run.duplicated, missing: run.missingInDatabase, foreign: run.foreignDeliveries }).toEqual({ acknowledged: 60, delivered: 60, lost: 0, duplicated: 0, missing: 0, foreign: 0 });
    expect(run.updatesLost).toBe(0);
    expect(run.auditChain.ok).toBe(true);
    // With one process up through each fault, most pre-alerts reach the boards live and are timed.
    expect(run.latencySamples).toBeGreaterThan(0);
    expect(run.p99Ms!).toBeLessThan(10_000);
  }, 150_000);
});
