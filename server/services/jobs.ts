import type { AppDeps } from '../deps';

export interface Job { stop(): void }

/** Work the server does on its own clock (escalations, say). Each job returns a way to stop it. */
export function backgroundJobs(_deps: AppDeps): Job {
  const jobs: Job[] = [];
  return { stop: () => jobs.forEach((job) => job.stop()) };
}
