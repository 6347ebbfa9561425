import { EventEmitter } from 'node:events';
import type { NextFunction, Request, Response } from 'express';
import { describe, expect, it } from 'vitest';
import { catchUpLane } from '../../../server/realtime/catch-up';

const tick = () => new Promise<void>((resolve) => setImmediate(resolve));

describe('the catch-up lane', () => {
  it('runs at most its number of places at once, in the order asked, and answers each', async () => {
    const lane = catchUpLane(2);
    let running = 0;
    let most = 0;
    const order: number[] = [];
    const work = (n: number) =>
      lane.run(async () => {
        running++;
        most = Math.max(most, running);
        order.push(n);
        await tick();
        await tick();
        running--;
        return n * 10;
      });
    const answers = await Promise.all([1, 2, 3, 4, 5].map(work));
    expect(answers).toEqual([10, 20, 30, 40, 50]);
    expect(most).toBe(2);
    expect(order).toEqual([1, 2, 3, 4, 5]);
    expect(lane.stats).toEqual({ running: 0, waiting: 0, done: 5 });
  });

  it('lets work that arrives on the event loop go before waiting catch-up work', async () => {
    const lane = catchUpLane(1);
    const seen: string[] = [];
    // Ten reconnects ask at once; a pre-alert arrives (a socket read is a macrotask) just after.
    const reconnects = Array.from({ length: 10 }, (_, i) => lane.run(() => void seen.push(`reconnect ${i}`)));
    setImmediate(() => seen.push('pre-alert'));
    await Promise.all(reconnects);
    // Without the lane all ten would run in this turn of the loop, before the pre-alert.
    expect(seen.indexOf('pre-alert')).toBeLessThan(3);
    expect(seen.filter((s) => s.startsWith('reconnect'))).toHaveLength(10);
  });

  it('frees the place of work that fails, and passes the failure on', async () => {
    const lane = catchUpLane(1);
    await expect(lane.run(async () => Promise.reject(new Error('session store away')))).rejects.toThrow('session store away');
    expect(await lane.run(() => 'next one runs')).toBe('next one runs');
    expect(lane.stats.running).toBe(0);
  });

  it('ends a middleware turn when it calls next, or when it answers without calling next', async () => {
    const lane = catchUpLane(1);
    const response = () => Object.assign(new EventEmitter(), {}) as unknown as Response;
    const passes = lane.wrap((_req, _res, next) => next());
    const refuses = lane.wrap((_req, res) => setImmediate(() => res.emit('close')));
    const nextCalls: unknown[] = [];
    const next: NextFunction = (err?: unknown) => void nextCalls.push(err ?? 'ok');
    passes({} as Request, response(), next);
    refuses({} as Request, response(), next);
    passes({} as Request, response(), next);
    for (let i = 0; i < 10 && lane.stats.done < 3; i++) await tick();
    expect(lane.stats).toEqual({ running: 0, waiting: 0, done: 3 });
    expect(nextCalls).toEqual(['ok', 'ok']);
  });

  it('refuses a lane without a whole number of places', () => {
    expect(() => catchUpLane(0)).toThrow(/whole number/);
    expect(() => catchUpLane(1.5)).toThrow(/whole number/);
  });
});
