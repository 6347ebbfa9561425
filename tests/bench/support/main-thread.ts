// The page's main thread under a DevTools trace: which tasks ran from the navigation until a
// moment (Send usable, for the field app), how long each took, and what took the time in the
// long ones. Durations are the browser's own, so they say where the time goes; on a busy machine
// they all stretch together.
import type { CDPSession } from 'playwright-core';

interface TraceEvent {
  name: string;
  ph: string;
  pid: number;
  tid: number;
  ts: number;
  dur?: number;
  args?: { frame?: string; data?: { url?: string; frames?: Array<{ frame: string; isOutermostMainFrame?: boolean }> } };
}

export interface MainThreadSummary {
  /** From the navigation's start until the moment, by the page's clock. */
  sendMs: number;
  /** Sum of the main thread's tasks in that time, and how many there were. */
  busyMs: number;
  tasks: number;
  longestMs: number;
  /** Tasks of 50 ms or more (the browser's "long task"), with what took most of each. */
  longTasks: Array<{ atMs: number; ms: number; what: string }>;
}

/** What a part of a task is, in words, for the list of long tasks. */
const PARTS: Record<string, string> = {
  'v8.compileModule': 'compile',
  'v8.evaluateModule': 'run module',
  EvaluateScript: 'run script',
  FunctionCall: 'call',
  RunMicrotasks: 'microtasks',
  TimerFire: 'timer',
  FireAnimationFrame: 'animation frame',
  EventDispatch: 'event',
  UpdateLayoutTree: 'style',
  Layout: 'layout',
  Paint: 'paint',
  ParseHTML: 'parse HTML',
  ParseAuthorStyleSheet: 'parse CSS',
  MinorGC: 'GC',
  MajorGC: 'GC',
  'v8.produceModuleCache': 'code cache',
};

const LONG_TASK_MS = 50;
const ms = (us: number) => Math.round(us / 100) / 10;

/**
 * Runs `open` (which navigates the page and resolves with the moment, as wall-clock ms) under a
 * trace, and sums up the main thread of the page's renderer from the navigation to that moment.
 */
export async function traceMainThread(cdp: CDPSession, open: () => Promise<number>): Promise<MainThreadSummary> {
  const events: TraceEvent[] = [];
  cdp.on('Tracing.dataCollected', (e) => events.push(...(e.value as unknown as TraceEvent[])));
  const complete = new Promise((resolve) => cdp.once('Tracing.tracingComplete', resolve));
  await cdp.send('Tracing.start', { categories: 'devtools.timeline,disabled-by-default-devtools.timeline,loading,blink.user_timing,v8.execute', transferMode: 'ReportEvents' });
  const moment = await open();
  // The page's clock starts at the navigation; its first contentful paint is on both clocks.
  const { result } = await cdp.send('Runtime.evaluate', {
    expression: `[performance.timeOrigin, performance.getEntriesByName('first-contentful-paint')[0]?.startTime]`,
    returnByValue: true,
  });
  await cdp.send('Tracing.end');
  await complete;

  const [timeOrigin, paintedAt] = result.value as [number, number | undefined];
  const frame = events.find((e) => e.name === 'TracingStartedInBrowser')?.args?.data?.frames?.find((f) => f.isOutermostMainFrame)?.frame;
  const paint = events.find((e) => e.name === 'firstContentfulPaint' && e.args?.frame === frame);
  if (!paint || paintedAt === undefined) throw new Error('The trace has no first paint of the page.');
  const navigation = { pid: paint.pid, tid: paint.tid, ts: paint.ts - paintedAt * 1000 };
  const sendMs = Math.round(moment - timeOrigin);
  const end = navigation.ts + sendMs * 1000;
  const onMain = (e: TraceEvent) => e.pid === navigation.pid && e.tid === navigation.tid && e.ph === 'X' && e.dur !== undefined;
  const tasks = events.filter((e) => onMain(e) && e.name === 'RunTask' && e.ts >= navigation.ts && e.ts < end);
  const longTasks = tasks
    .filter((t) => t.dur! >= LONG_TASK_MS * 1000)
    .map((t) => {
      const parts = new Map<string, number>();
      for (const e of events) {
        const part = PARTS[e.name];
        if (!part || !onMain(e) || e.ts < t.ts || e.ts >= t.ts + t.dur!) continue;
        const file = e.args?.data?.url ? ` ${new URL(e.args.data.url, 'http://page').pathname.split('/').pop()}` : '';
        parts.set(part + file, (parts.get(part + file) ?? 0) + e.dur!);
      }
      const what = [...parts].sort((a, b) => b[1] - a[1]).slice(0, 4).map(([part, us]) => `${part} ${ms(us)} ms`).join(', ');
      return { atMs: ms(t.ts - navigation.ts), ms: ms(t.dur!), what };
    });
  return {
    sendMs,
    busyMs: ms(tasks.reduce((sum, t) => sum + t.dur!, 0)),
    tasks: tasks.length,
    longestMs: ms(Math.max(0, ...tasks.map((t) => t.dur!))),
    longTasks,
  };
}
