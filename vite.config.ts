import { existsSync, readdirSync, readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { defineConfig, type Plugin } from 'vitest/config';
import vue from '@vitejs/plugin-vue';
import { VitePWA } from 'vite-plugin-pwa';
import { compression } from 'vite-plugin-compression2';
import { plumblineTheme } from './src/theme/plumbline-preset.ts';
import { primevueThemeCss } from './src/theme/theme-css.ts';
import { BUILD_MANIFEST, CREW_VIEW, firstLoadFiles, type BuildManifest } from './server/cli/client-build.ts';

const require = createRequire(import.meta.url);
const subsetFont = require('subset-font') as (font: Buffer, text: string, opts: { targetFormat: 'woff2' }) => Promise<Buffer>;

function sourceFiles(dir: string): string[] {
  return readdirSync(dir, { withFileTypes: true }).flatMap((e) =>
    e.isDirectory() ? sourceFiles(join(dir, e.name)) : /\.(vue|ts)$/.test(e.name) ? [join(dir, e.name)] : [],
  );
}

/**
 * `virtual:used-icons.css`: the PrimeIcons classes that src/ names (`pi-send`, …) and a woff2 of
 * just their glyphs, instead of the whole 300-icon font in five formats.
 */
function usedIcons(): Plugin {
  const id = 'virtual:used-icons.css';
  let serving = false;
  return {
    name: 'plumbline-used-icons',
    configResolved: (config) => {
      serving = config.command === 'serve';
    },
    resolveId: (source) => (source === id ? `\0${id}` : null),
    async load(resolved) {
      if (resolved !== `\0${id}`) return null;
      // The development server has no build output to emit into: it serves the whole set.
      if (serving) return `@import "primeicons/primeicons.css";`;
      const names = new Set<string>();
      for (const file of sourceFiles('src')) {
        this.addWatchFile(file);
        for (const m of readFileSync(file, 'utf8').matchAll(/\bpi-([a-z][a-z-]*[a-z])\b/g)) names.add(m[1]);
      }
      const css = readFileSync(require.resolve('primeicons/primeicons.css'), 'utf8');
      const base = css.slice(css.indexOf('.pi {'), css.indexOf('.pi-fw'));
      const rules: string[] = [];
      let glyphs = '';
      for (const name of [...names].sort()) {
        const rule = new RegExp(`\\.pi-${name}:before \\{\\s*content: "\\\\([0-9a-f]+)";\\s*\\}`).exec(css);
        if (!rule) continue;
        glyphs += String.fromCodePoint(parseInt(rule[1], 16));
        rules.push(`.pi-${name}:before { content: "\\${rule[1]}"; }`);
      }
      const font = await subsetFont(readFileSync(require.resolve('primeicons/fonts/primeicons.woff2')), glyphs, { targetFormat: 'woff2' });
      const file = this.emitFile({ type: 'asset', name: 'primeicons-used.woff2', source: font });
      const url = `__VITE_ASSET__${file}__`;
      return `@font-face { font-family: "primeicons"; font-display: block; src: url("${url}") format("woff2"); font-weight: normal; font-style: normal; }\n${base}\n${rules.join('\n')}\n`;
    },
  };
}

/**
 * The crew's screen is fetched with the entry, not after it: the page names its code and styles
 * for the browser to fetch at once (modulepreload, preload), which saves a round trip and keeps
 * a weak link busy from the start. Nothing is loaded twice: every device's service worker keeps
 * these same files at install (see manifestTransforms below).
 */
function preloadCrewScreen(): Plugin {
  return {
    name: 'plumbline-preload-crew-screen',
    apply: 'build',
    transformIndexHtml: {
      order: 'post',
      handler(_html, ctx) {
        const bundle = ctx.bundle;
        if (!bundle) return [];
        const chunks = Object.values(bundle).filter((c) => c.type === 'chunk');
        const crew = chunks.find((c) => c.facadeModuleId?.endsWith(CREW_VIEW));
        if (!crew) throw new Error(`The build has no chunk for ${CREW_VIEW}.`);
        const entry = chunks.find((c) => c.isEntry);
        const inEntry = new Set([entry?.fileName, ...(entry?.imports ?? [])]);
        const scripts = new Set<string>();
        const styles = new Set<string>();
        const visit = (fileName: string) => {
          if (scripts.has(fileName) || inEntry.has(fileName)) return;
          const chunk = bundle[fileName];
          if (chunk?.type !== 'chunk') return;
          scripts.add(fileName);
          for (const css of chunk.viteMetadata?.importedCss ?? []) styles.add(css);
          chunk.imports.forEach(visit);
        };
        visit(crew.fileName);
        return [
          // Who is signed in: asked for beside the code rather than after it has run.
          { tag: 'link', attrs: { rel: 'preload', as: 'fetch', crossorigin: true, href: '/api/me' }, injectTo: 'head' as const },
          ...[...scripts].map((file) => ({ tag: 'link', attrs: { rel: 'modulepreload', crossorigin: true, href: `/${file}` }, injectTo: 'head' as const })),
          ...[...styles].map((file) => ({ tag: 'link', attrs: { rel: 'preload', as: 'style', crossorigin: true, href: `/${file}` }, injectTo: 'head' as const })),
        ];
      },
    },
  };
}

/** The colour of the app bar and of the installed app's title bar and splash screen. */
const THEME_COLOR = '#1c2a3f';

// One config for the client build, the dev middleware and the tests.
export default defineConfig({
  publicDir: 'src/public',
  // `@/` is src, `@shared/` is shared, for the client and its tests (src/tsconfig.json has the same paths).
  resolve: {
    alias: {
      '@': fileURLToPath(new URL('./src', import.meta.url)),
      '@shared': fileURLToPath(new URL('./shared', import.meta.url)),
    },
  },
  plugins: [
    vue(),
    primevueThemeCss(plumblineTheme),
    usedIcons(),
    preloadCrewScreen(),
    VitePWA({
      // The page decides when a new version takes over (see src/composables/use-app-update.ts):
      // never while a form is half typed or a pre-alert waits in the outbox.
      registerType: 'prompt',
      injectRegister: false,
      // The icons come in through globPatterns below, once each.
      includeManifestIcons: false,
      manifest: {
        name: 'Plumbline — fall pre-alerts',
        short_name: 'Plumbline',
        description: 'Fall pre-alerts from the ambulance to the emergency department.',
        id: '/',
        start_url: '/',
        scope: '/',
        display: 'standalone',
        orientation: 'any',
        lang: 'en',
        theme_color: THEME_COLOR,
        background_color: '#faf8f5',
        icons: [
          { src: '/icons/icon-192.png', sizes: '192x192', type: 'image/png' },
          { src: '/icons/icon-512.png', sizes: '512x512', type: 'image/png' },
          { src: '/icons/maskable-512.png', sizes: '512x512', type: 'image/png', purpose: 'maskable' },
          { src: '/icons/icon.svg', sizes: 'any', type: 'image/svg+xml' },
        ],
      },
      workbox: {
        // The shell and every screen's code, styles and fonts; never an API answer (they carry
        // patient data and live, when a screen keeps them, in IndexedDB that sign-out wipes).
        globPatterns: ['**/*.{js,css,html,woff2,svg,png}'],
        globIgnores: ['**/*.{br,gz}', 'icons/maskable*'],
        // Of the screens' code only the crew's goes in at install; a desk screen's is kept the
        // first time it is opened (the runtime rule below), so a phone never fetches the board.
        manifestTransforms: [
          (entries) => {
            if (!existsSync(BUILD_MANIFEST)) return { manifest: entries, warnings: ['No build manifest: precaching every screen.'] };
            const crew = firstLoadFiles(JSON.parse(readFileSync(BUILD_MANIFEST, 'utf8')) as BuildManifest, CREW_VIEW, { later: true });
            const keep = new Set([...crew.scripts, ...crew.styles, ...crew.assets]);
            return { manifest: entries.filter((e) => !e.url.startsWith('assets/') || keep.has(e.url)), warnings: [] };
          },
        ],
        // Only the client's own screens open from the cache; every page the server writes itself
        // (sign-in, the identity provider, anything added beside them) still goes to the server.
        navigateFallback: '/index.html',
        navigateFallbackAllowlist: [/^\/$/, /^\/(pre-alert|board|review|quality|policies|people|mail|signed-out)(\/|$|\?)/],
        runtimeCaching: [
          {
            // Hashed file names: a name's content never changes, so the first copy is good for ever.
            urlPattern: /\/assets\/[^/]+\.(js|css|woff2)$/,
            handler: 'CacheFirst',
            options: { cacheName: 'plumbline-screens', expiration: { maxEntries: 120 } },
          },
        ],
        cleanupOutdatedCaches: true,
        clientsClaim: false,
        skipWaiting: false,
      },
    }),
    // Brotli and gzip copies beside each file, served as they are (server/app.ts).
    compression({ algorithms: ['brotliCompress', 'gzip'], include: /\.(js|css|html|svg|json|webmanifest|txt)$/, threshold: 512 }),
  ],
  build: {
    outDir: 'dist/client',
    emptyOutDir: true,
    // The budget test (tests/unit/client/script-budget.test.ts) reads the chunk graph from here.
    manifest: true,
    chunkSizeWarningLimit: 1500,
    // A slow shared machine makes the timing warning fire on every build; it says nothing about the app.
    rolldownOptions: { checks: { bundlerTimings: false } },
  },
  test: {
    environment: 'node',
    testTimeout: 30_000,
    hookTimeout: 120_000,
    globalSetup: ['tests/global-setup.ts'],
    // Run by the piece: `npm run test:unit` (pure code, seconds), `test:integration` (the real
    // server on port 0), `test:e2e` (Debian Chromium against the built client); `npm test` runs all.
    // With TEST_DATABASE_URL (a PostgreSQL server), the integration suite runs a second time on
    // PostgreSQL (`--project postgres` picks that pass alone).
    projects: [
      { extends: true, test: { name: 'unit', include: ['tests/unit/**/*.test.ts'] } },
      { extends: true, test: { name: 'integration', include: ['tests/integration/**/*.test.ts'] } },
      { extends: true, test: { name: 'e2e', include: ['tests/e2e/**/*.test.ts'] } },
      ...(process.env.TEST_DATABASE_URL
        ? [{ extends: true as const, test: { name: 'postgres', include: ['tests/integration/**/*.test.ts'], env: { TEST_ENGINE: 'postgres' } } }]
        : []),
    ],
  },
});
