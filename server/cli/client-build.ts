import { spawnSync } from 'node:child_process';
import { existsSync, statSync } from 'node:fs';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { newestMtime } from './server-build.mjs';

/** The built client that the production server serves. */
export const BUILT_CLIENT = 'dist/client/index.html';


/**
 * Whether the client must be built before it is served: never built, or any of its sources
 * (the client, the shared code, the page, the build settings) changed since, as after a pull.
 */
export function clientBuildIsStale(root = '.'): boolean {
  const built = join(root, BUILT_CLIENT);
  if (!existsSync(built)) return true;
  const sources = ['src', 'shared', 'index.html', 'vite.config.ts'].map((p) => newestMtime(join(root, p)));
  return Math.max(...sources) > statSync(built).mtimeMs;
}

/**
 * Builds the client as it ships, in a child process: with NODE_ENV=production whatever the
 * caller's (a test runner sets "test", which would make Vue and its libraries ship their
 * development builds and the budgets measure the wrong thing).
 */
export function buildClient(root = '.'): void {
  const vite = join(dirname(createRequire(import.meta.url).resolve('vite/package.json')), 'bin', 'vite.js');
  const built = spawnSync(process.execPath, [vite, 'build', '--logLevel', 'warn'], { cwd: root, stdio: 'inherit', env: { ...process.env, NODE_ENV: 'production' } });
  if (built.status !== 0) throw new Error('The client build failed; see above.');
}

/** One chunk of the build's manifest (dist/client/.vite/manifest.json), as Vite writes it. */
export interface ManifestChunk {
  file: string;
  src?: string;
  isEntry?: boolean;
  imports?: string[];
  dynamicImports?: string[];
  css?: string[];
  assets?: string[];
}
export type BuildManifest = Record<string, ManifestChunk>;

export const BUILD_MANIFEST = 'dist/client/.vite/manifest.json';

/** The crew's screen: what a paramedic's phone opens on and must be able to open offline. */
export const CREW_VIEW = 'src/views/NewPreAlertView.vue';

/**
 * What every start fetches as soon as the entry has run, though the entry imports it
 * dynamically: the service worker's registration helper (vite-plugin-pwa's register code loads
 * workbox-window). It belongs to every first load.
 */
const AT_EVERY_START = /(^|\/)node_modules\/workbox-window\//;

/**
 * The files a first load of a screen fetches: the entry, the screen's chunk, everything they
 * import statically, what the entry loads at every start, their styles and the fonts those name.
 * Other dynamic imports (other screens) are left out, since the browser fetches them only when
 * the person opens those screens; with `later`, what the screen itself fetches on first use (its
 * dialogs, the overlays) is counted in, which is what must be kept for the screen to work offline.
 */
export function firstLoadFiles(manifest: BuildManifest, view: string, opts: { later?: boolean } = {}): { scripts: string[]; styles: string[]; assets: string[] } {
  const entry = Object.entries(manifest).find(([, c]) => c.isEntry)?.[0];
  if (!entry) throw new Error('The build has no entry chunk.');
  const scripts = new Set<string>();
  const styles = new Set<string>();
  const assets = new Set<string>();
  const visit = (key: string) => {
    const chunk = manifest[key];
    if (!chunk) throw new Error(`${key} is not in the build's manifest.`);
    if (scripts.has(chunk.file)) return;
    scripts.add(chunk.file);
    for (const css of chunk.css ?? []) styles.add(css);
    for (const asset of chunk.assets ?? []) assets.add(asset);
    for (const imported of chunk.imports ?? []) visit(imported);
    if (opts.later) for (const imported of chunk.dynamicImports ?? []) if (!imported.startsWith('src/views/')) visit(imported);
  };
  visit(entry);
  for (const imported of manifest[entry].dynamicImports ?? []) if (AT_EVERY_START.test(imported)) visit(imported);
  visit(view);
  return { scripts: [...scripts], styles: [...styles], assets: [...assets] };
}
