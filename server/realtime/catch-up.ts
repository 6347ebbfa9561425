import type { RequestHandler } from 'express';

/**
 * Catch-up work waits its turn here: a socket's sign-in check, a board's reload, the crews' copy
 * of a change (realtime/broadcast.ts). A pre-alert, and the boards' copy of it, do not.
 *
 * After a restart or a network blip, hundreds of ambulances and boards come back within a
 * second or two. Each one's session lookup and each board's reload is a few milliseconds of
 * CPU, and the event loop starts them all at once. A pre-alert that arrives in the middle
 * waits behind the whole crowd. In the lane, catch-up work runs a few at a time, and the event
 * loop gets a turn (`setImmediate`) before each one starts. A pre-alert that arrives meanwhile
 * is read and handled first, and waits for at most the work already running.
 */
export interface CatchUpLane {
  /** Runs `work` when its turn comes. */
  run<T>(work: () => Promise<T> | T): Promise<T>;
  /** An Express-style middleware run in the lane: the turn ends when it calls `next`. */
  wrap(handler: RequestHandler): RequestHandler;
  /** How many are running and how many wait, for tests and the health of a deployment. */
  readonly stats: { running: number; waiting: number; done: number };
}

export function catchUpLane(concurrency = 2): CatchUpLane {
  if (!Number.isInteger(concurrency) || concurrency < 1) throw new Error(`a lane needs a whole number of places, not ${concurrency}`);
  const waiting: Array<() => void> = [];
  const stats = { running: 0, waiting: 0, done: 0 };

  const startNext = () => {
    while (stats.running < concurrency && waiting.length) {
      stats.running++;
      stats.waiting = waiting.length - 1;
      setImmediate(waiting.shift()!);
    }
  };
  const finish = () => {
    stats.running--;
    stats.done++;
    startNext();
  };
  const turn = () =>
    new Promise<void>((resolve) => {
      waiting.push(resolve);
      stats.waiting = waiting.length;
      startNext();
    });

  return {
    stats,
    async run(work) {
      await turn();
      try {
        return await work();
      } finally {
        finish();
      }
    },
    wrap(handler) {
      return (req, res, next) => {
        void turn().then(() => {
          let ended = false;
          const end = () => {
            if (!ended) {
              ended = true;
              finish();
            }
          };
          // A handler that answers without calling next (a refusal) ends its turn when the response ends.
          res.once('close', end);
          try {
            handler(req, res, (err?: unknown) => {
              end();
              next(err);
            });
          } catch (err) {
            end();
            next(err);
          }
        });
      };
    },
  };
}
