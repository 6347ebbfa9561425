import type { AppDeps } from '../deps';
import { escalationJob } from './escalation';
import { repagingJob } from './repaging';

export interface Job { stop(): void }

/** Work the server does on its own clock (escalations, say). Each job returns a way to stop it. */
export function backgroundJobs(deps: AppDeps): Job {
  const jobs: Job[] = [escalationJob(deps), repagingJob(deps)];
  return { stop: () => jobs.forEach((job) => job.stop()) };
}
