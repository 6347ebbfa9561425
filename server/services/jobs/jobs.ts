import { join } from 'node:path';
import type { AppDeps } from '../../deps';
import { CHECKPOINT_FILE, checkpointJob } from '../audit/checkpoints';
import { escalationJob } from './escalation';
import { repagingJob } from './repaging';
import type { Job } from './job';

export type { Job };


/** Work the server does on its own clock (escalations, re-paging, audit checkpoints). Each job returns a way to stop it. */
export function backgroundJobs(deps: AppDeps): { stop(): Promise<void> } {
  const jobs: Job[] = [escalationJob(deps), repagingJob(deps), checkpointJob({ ...deps, file: join(deps.config.dataDir, CHECKPOINT_FILE) })];
  return { stop: async () => void (await Promise.all(jobs.map((job) => job.stop()))) };
}
