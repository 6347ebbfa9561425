// The crew's app on a weak link, measured in Chromium with its own network emulation (the method
// is in tests/bench/field-app.md). Part of `npm run bench`; alone: `npx tsx tests/bench/field-app.ts
// [--json] [--files]` (--files lists each file of the first load with its timing). It builds the client first when the build is older than its sources.
import { pathToFileURL } from 'node:url';
import type { BrowserContext, CDPSession, Page } from 'playwright-core';
import { buildClient, clientBuildIsStale } from '../../server/cli/client-build';
import { launchBrowser, PHONE, signInThroughPage } from '../e2e/support/browser';
import { startTestServer } from '../support/server';

/** The link: 400 kbit/s each way, 400 ms latency [ours: a weak mobile signal in a moving ambulance]. */
export const WEAK_LINK = { offline: false, latency: 400, downloadThroughput: 400_000 / 8, uploadThroughput: 400_000 / 8 };
/** Goals [ours]: usable from an empty cache within 6 s, from the installed app within 1 s. */
export const FIELD_TARGETS = { scriptKb: 150, totalKb: 300, emptyCacheMs: 6000, installedMs: 1000 };

export interface FieldAppResult {
  link: { kbitPerSecond: number; latencyMs: number };
  /** What the first load from an empty cache moved, as sent on the wire (compressed). */
  firstLoad: { scriptKb: number; totalKb: number; apiKb: number; requests: number; encodings: Record<string, number> };
  /** Navigation start until the Send button is on screen and enabled. */
  emptyCacheSendMs: number;
  installedSendMs: number;
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

async function timeToSend(page: Page, url: string): Promise<number> {
  const started = Date.now();
  await page.goto(url, { waitUntil: 'commit' });
  await page.getByRole('button', { name: 'Send pre-alert' }).and(page.locator(':enabled')).waitFor({ state: 'visible', timeout: 60_000 });
  return Date.now() - started;
}

async function weakLinkPage(context: BrowserContext): Promise<{ page: Page; cdp: CDPSession }> {
  const page = await context.newPage();
  const cdp = await context.newCDPSession(page);
  await cdp.send('Network.enable');
  await cdp.send('Network.emulateNetworkConditions', WEAK_LINK);
  return { page, cdp };
}

const kb = (bytes: number) => Math.round(bytes / 102.4) / 10;

export async function measureFieldApp(log: (line: string) => void = () => undefined): Promise<FieldAppResult> {
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
    const crewUrl = new URL('/pre-alert', server.url).href;

    const first = await weakLinkPage(context);
    const transfers = await recordTransfers(first.cdp);
    const emptyCacheSendMs = await timeToSend(first.page, crewUrl);
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
    const installedSendMs = await timeToSend(again.page, crewUrl);
    const fromWorker = await again.page.evaluate(() => navigator.serviceWorker.controller !== null);
    if (!fromWorker) throw new Error('The second opening was not served by the service worker.');
    log(`field app: installed, Send usable after ${installedSendMs} ms`);
    await context.close();

    return {
      link: { kbitPerSecond: 400, latencyMs: WEAK_LINK.latency },
      firstLoad,
      emptyCacheSendMs,
      installedSendMs,
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
  const result = await measureFieldApp((line) => process.stderr.write(`${line}\n`));
  if (process.argv.includes('--json')) process.stdout.write(`${JSON.stringify({ fieldApp: result })}\n`);
  else console.log(JSON.stringify(result, null, 2));
}
