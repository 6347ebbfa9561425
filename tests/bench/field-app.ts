// The crew's app on a weak link, measured in Chromium with its own network emulation (the method
// is in tests/bench/field-app.md). Part of `npm run bench`; alone: `npx tsx tests/bench/field-app.ts
// [--json] [--files] [--trace]`: --files lists each file of the first load with its timing,
// --trace opens the installed app once more under a trace and lists its main thread's tasks. It
// builds the client first when the build is older than its sources.
import { pathToFileURL } from 'node:url';
import type { IncomingMessage } from 'node:http';
import type { BrowserContext, CDPSession, Page } from 'playwright-core';
import { buildClient, clientBuildIsStale } from '../../server/cli/client-build';
import { launchBrowser, PHONE, signInThroughPage } from '../e2e/support/browser';
import { startTestServer } from '../support/server';
import { traceMainThread, type MainThreadSummary } from './support/main-thread';

/** The issue's link: 400 kbit/s each way, 400 ms latency [ours: a weak mobile signal in a moving ambulance]. */
export const WEAK_LINK = { offline: false, latency: 400, downloadThroughput: 400_000 / 8, uploadThroughput: 400_000 / 8 };
/** Goals [ours]: usable from an empty cache within 6 s, from the installed app within 1 s. */
export const FIELD_TARGETS = { scriptKb: 150, totalKb: 300, emptyCacheMs: 6000, installedMs: 1000 };

export interface FieldAppResult {
  link: { kbitPerSecond: number; latencyMs: number };
  /** What the first load from an empty cache moved, as sent on the wire (compressed). */
  firstLoad: { scriptKb: number; totalKb: number; apiKb: number; requests: number; encodings: Record<string, number> };
  /** From asking for the page until the Send button is drawn, enabled, and the page free to take a tap. */
  emptyCacheSendMs: number;
  installedSendMs: number;
  /** What reached the server from the installed opening before Send was usable (none is needed). */
  installedServerRequests: string[];
  /** The installed opening's main-thread tasks before Send was usable, from a trace of a further opening (`--trace` only). */
  installedMainThread?: MainThreadSummary;
  targets: { script: boolean; total: boolean; emptyCache: boolean; installed: boolean };
}

interface Transfer { url: string; type: string; bytes: number; encoding: string; startMs: number; endMs: number }

/** Records every response of a page with its bytes on the wire, through the browser's protocol. */
async function recordTransfers(cdp: CDPSession): Promise<Transfer[]> {
  const seen = new Map<string, Transfer>();
  const transfers: Transfer[] = [];
  const t0 = Date.now();
  cdp.on('Network.requestWillBeSent', (e) => {
    seen.set(e.requestId, { url: e.request.url, type: e.type ?? 'Other', bytes: 0, encoding: 'none', startMs: Date.now() - t0, endMs: 0 });
  });
  cdp.on('Network.responseReceived', (e) => {
    const t = seen.get(e.requestId);
    const headers = Object.fromEntries(Object.entries(e.response.headers).map(([k, v]) => [k.toLowerCase(), String(v)]));
    if (t) Object.assign(t, { type: e.type, encoding: headers['content-encoding'] ?? 'none' });
  });
  // The body as it came over the wire (compressed), without the headers.
  cdp.on('Network.dataReceived', (e) => {
    const t = seen.get(e.requestId);
    if (t) t.bytes += e.encodedDataLength;
  });
  cdp.on('Network.loadingFinished', (e) => {
    const t = seen.get(e.requestId);
    if (t) transfers.push({ ...t, endMs: Date.now() - t0 });
  });
  await cdp.send('Network.enable');
  return transfers;
}

/**
 * Tells the bench, as wall-clock ms, when Send becomes usable: the button is in the document,
 * enabled and laid out, a frame showing it has been drawn, and the page has come round to its
 * next task (so a tap would be taken). It only watches insertions and reads the layout after a
 * paint, and it calls out through a binding, so nothing from outside runs in the page while it
 * starts. Polling the page from outside instead (Playwright's role locator) first had Playwright
 * load its own script into the page and then, every few frames, work out the role and name of
 * every button of the long form: on a busy machine that took the page's main thread for hundreds
 * of milliseconds, and it saw the button up to a poll late.
 */
const MARK_SEND_USABLE = `(() => {
  const find = () => [...document.querySelectorAll('button[type="submit"]')].find((b) => b.textContent.trim() === 'Send pre-alert');
  const afterPaint = () => requestAnimationFrame(() => setTimeout(() => {
    const button = find();
    if (button && !button.disabled && button.getClientRects().length > 0) window.sendUsable(performance.timeOrigin + performance.now());
    else afterPaint();
  }));
  const watch = new MutationObserver(() => { if (find()) { watch.disconnect(); afterPaint(); } });
  watch.observe(document, { childList: true, subtree: true });
})()`;

/** Resolves each opening's moment; the openings are measured one at a time. */
let onSendUsable: ((at: number) => void) | undefined;

async function watchForSend(context: BrowserContext): Promise<void> {
  await context.exposeBinding('sendUsable', (_source, at: number) => onSendUsable?.(at));
  await context.addInitScript(MARK_SEND_USABLE);
}

/** Opens the crew's screen and returns the ms from asking for it until Send was usable, and that moment. */
async function timeToSend(page: Page, url: string): Promise<{ ms: number; usableAt: number; started: number }> {
  const usable = new Promise<number>((resolve, reject) => {
    onSendUsable = resolve;
    setTimeout(() => reject(new Error('Send was not usable within 60 s.')), 60_000).unref();
  });
  const started = Date.now();
  await page.goto(url, { waitUntil: 'commit' });
  const usableAt = await usable;
  // The same button as a person or a screen reader finds it, by its role and name, enabled.
  await page.getByRole('button', { name: 'Send pre-alert' }).and(page.locator(':enabled')).waitFor({ state: 'visible', timeout: 10_000 });
  return { ms: Math.round(usableAt - started), usableAt, started };
}

async function weakLinkPage(context: BrowserContext): Promise<{ page: Page; cdp: CDPSession }> {
  const page = await context.newPage();
  const cdp = await context.newCDPSession(page);
  await cdp.send('Network.enable');
  await cdp.send('Network.emulateNetworkConditions', WEAK_LINK);
  return { page, cdp };
}

const kb = (bytes: number) => Math.round(bytes / 102.4) / 10;

export async function measureFieldApp(log: (line: string) => void = () => undefined, opts: { trace?: boolean } = {}): Promise<FieldAppResult> {
  if (clientBuildIsStale()) {
    log('field app: building the client');
    buildClient();
  }
  const server = await startTestServer();
  const browser = await launchBrowser();
  try {
    // Signed in at full speed in a throwaway context; only its cookie goes on, so the measured
    // context starts with an empty HTTP cache and no service worker.
    const signing = await browser.newContext({ ...PHONE, serviceWorkers: 'block' });
    await signInThroughPage(await signing.newPage(), server.url, 'paramedic@plumbline.test', '/pre-alert');
    const state = await signing.storageState();
    await signing.close();

    const context = await browser.newContext({ ...PHONE, storageState: state });
    await watchForSend(context);
    // Every request that reaches the server, page's and service worker's alike, with its time
    // (heard before the app's own listener, which rewrites the path as it routes).
    const arrivals: Array<{ at: number; path: string }> = [];
    const arrived = (req: IncomingMessage) => arrivals.push({ at: Date.now(), path: (req.url ?? '').split('?')[0] });
    server.http.prependListener('request', arrived).prependListener('upgrade', arrived);
    const crewUrl = new URL('/pre-alert', server.url).href;

    const first = await weakLinkPage(context);
    const transfers = await recordTransfers(first.cdp);
    const emptyCacheSendMs = (await timeToSend(first.page, crewUrl)).ms;
    // Whatever the first load still fetches after Send is usable (the service worker's own
    // install fetches are its, not the page's) is counted too: wait for the page to go quiet.
    await first.page.waitForLoadState('networkidle');
    const isApi = (t: Transfer) => /\/(api|socket\.io)\//.test(new URL(t.url).pathname);
    const app = transfers.filter((t) => !isApi(t));
    const firstLoad = {
      scriptKb: kb(app.filter((t) => t.type === 'Script').reduce((s, t) => s + t.bytes, 0)),
      totalKb: kb(app.reduce((s, t) => s + t.bytes, 0)),
      apiKb: kb(transfers.filter(isApi).reduce((s, t) => s + t.bytes, 0)),
      requests: app.length,
      encodings: app.reduce<Record<string, number>>((acc, t) => ({ ...acc, [t.encoding]: (acc[t.encoding] ?? 0) + 1 }), {}),
    };
    if (process.argv.includes('--files')) for (const t of transfers) log(`  ${t.startMs}-${t.endMs} ms ${t.type} ${t.encoding} ${t.bytes} B ${new URL(t.url).pathname}`);
    log(`field app: empty cache, Send usable after ${emptyCacheSendMs} ms; script ${firstLoad.scriptKb} KB, total ${firstLoad.totalKb} KB in ${firstLoad.requests} files`);

    // Installed: the service worker has precached the crew's screen; open it again on the same link.
    await first.page.evaluate(async () => {
      const registration = await navigator.serviceWorker.ready;
      if (registration.active?.state !== 'activated') await new Promise((r) => registration.active?.addEventListener('statechange', r));
    });
    await first.page.close();
    const again = await weakLinkPage(context);
    const installed = await timeToSend(again.page, crewUrl);
    const installedSendMs = installed.ms;
    const fromWorker = await again.page.evaluate(() => navigator.serviceWorker.controller !== null);
    if (!fromWorker) throw new Error('The second opening was not served by the service worker.');
    const installedServerRequests = arrivals.filter((a) => a.at >= installed.started && a.at <= installed.usableAt).map((a) => a.path);
    log(`field app: installed, Send usable after ${installedSendMs} ms; ${installedServerRequests.length} requests reached the server before it${installedServerRequests.length ? ` (${installedServerRequests.join(', ')})` : ''}`);
    await again.page.close();

    // A further opening under a trace, apart from the timed one (tracing slows the page a little).
    let installedMainThread: MainThreadSummary | undefined;
    if (opts.trace) {
      const traced = await weakLinkPage(context);
      installedMainThread = await traceMainThread(traced.cdp, async () => (await timeToSend(traced.page, crewUrl)).usableAt);
      log(`field app: traced installed opening, ${installedMainThread.sendMs} ms to Send; main thread busy ${installedMainThread.busyMs} ms in ${installedMainThread.tasks} tasks, longest ${installedMainThread.longestMs} ms`);
      for (const t of installedMainThread.longTasks) log(`  task at ${t.atMs} ms, ${t.ms} ms: ${t.what}`);
    }
    await context.close();

    return {
      link: { kbitPerSecond: 400, latencyMs: WEAK_LINK.latency },
      firstLoad,
      emptyCacheSendMs,
      installedSendMs,
      installedServerRequests,
      ...(installedMainThread ? { installedMainThread } : {}),
      targets: {
        script: firstLoad.scriptKb <= FIELD_TARGETS.scriptKb,
        total: firstLoad.totalKb <= FIELD_TARGETS.totalKb,
        emptyCache: emptyCacheSendMs <= FIELD_TARGETS.emptyCacheMs,
        installed: installedSendMs <= FIELD_TARGETS.installedMs,
      },
    };
  } finally {
    await browser.close();
    await server.close();
  }
}

if (import.meta.url === pathToFileURL(process.argv[1] ?? '').href) {
  const result = await measureFieldApp((line) => process.stderr.write(`${line}\n`), { trace: process.argv.includes('--trace') });
  if (process.argv.includes('--json')) process.stdout.write(`${JSON.stringify({ fieldApp: result })}\n`);
  else console.log(JSON.stringify(result, null, 2));
}
