import { hostname } from 'node:os';
import type { Knex } from 'knex';

/** This process, as a claim names it. */
export const processName = `${hostname()}:${process.pid}`;

/** The start of the period of `everyMs` that `at` falls in. */
export const periodStart = (at: number, everyMs: number) => Math.floor(at / everyMs) * everyMs;

/**
 * Claims one period of a job for this process; true when this process got it. Of several
 * processes asking for the same period, the first insert wins and every other one gets false.
 */
export async function claimPeriod(db: Knex, job: string, start: number, at: number): Promise<boolean> {
  const inserted = await db('job_claims').insert({ job, period_start: start, claimed_at: at, claimed_by: processName }).onConflict(['job', 'period_start']).ignore().returning('job');
  return inserted.length > 0;
}
