import { existsSync, readFileSync, statSync } from 'node:fs';
import { join } from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { BUILD_MANIFEST, buildClient, clientBuildIsStale, CREW_VIEW, firstLoadFiles, type BuildManifest } from '../../server/cli/client-build';

// The crew's first load on a weak link [ours: the budget of the field app, README "Using it", on a phone or tablet]:
// at most 150 KB of compressed script, 300 KB in all with styles, fonts and icons. The first load
// is the entry, the crew's screen, what they import, and the service worker's registration helper
// that every start loads (firstLoadFiles), as the field-app benchmark counts it.
const SCRIPT_BUDGET_KB = 150;
const TOTAL_BUDGET_KB = 300;
const DIST = 'dist/client';

/** What a browser that takes brotli receives for a built file: its .br copy when there is one. */
const sentBytes = (file: string) => {
  const br = join(DIST, `${file}.br`);
  return statSync(existsSync(br) ? br : join(DIST, file)).size;
};
const kb = (bytes: number) => Math.round(bytes / 102.4) / 10;

describe("the crew's first load, read from the build's manifest", () => {
  let manifest: BuildManifest;
  let crew: ReturnType<typeof firstLoadFiles>;

  beforeAll(async () => {
    const entryCode = () => {
      const built = JSON.parse(readFileSync(BUILD_MANIFEST, 'utf8')) as BuildManifest;
      return readFileSync(join(DIST, Object.values(built).find((c) => c.isEntry)!.file), 'utf8');
    };
    // A build made with NODE_ENV other than production carries Vue's development code and warnings.
    if (clientBuildIsStale() || !existsSync(BUILD_MANIFEST) || entryCode().includes('[Vue warn]')) buildClient();
    expect(entryCode()).not.toContain('[Vue warn]');
    manifest = JSON.parse(readFileSync(BUILD_MANIFEST, 'utf8')) as BuildManifest;
    crew = firstLoadFiles(manifest, CREW_VIEW);
  }, 180_000);

  it(`ships at most ${SCRIPT_BUDGET_KB} KB of compressed script`, () => {
    const script = crew.scripts.reduce((sum, f) => sum + sentBytes(f), 0);
    const largest = crew.scripts.map((f) => `${f} ${kb(sentBytes(f))} KB`).sort((a, b) => parseFloat(b.split(' ')[1]) - parseFloat(a.split(' ')[1]));
    expect(kb(script), `crew script over budget:\n${largest.join('\n')}`).toBeLessThanOrEqual(SCRIPT_BUDGET_KB);
    // Every script is there as brotli: an uncompressed file would be measured and sent as is.
    expect(crew.scripts.filter((f) => sentBytes(f) > 1024 && !existsSync(join(DIST, `${f}.br`)))).toEqual([]);
  });

  it(`moves at most ${TOTAL_BUDGET_KB} KB in all, fonts and icons included, and only woff2 fonts`, () => {
    const files = ['index.html', ...crew.scripts, ...crew.styles, ...crew.assets];
    expect(kb(files.reduce((sum, f) => sum + sentBytes(f), 0))).toBeLessThanOrEqual(TOTAL_BUDGET_KB);
    const fonts = crew.assets.filter((f) => /\.(woff2?|ttf|eot|otf)$/.test(f));
    expect(fonts.length).toBeGreaterThan(0);
    expect(fonts.filter((f) => !f.endsWith('.woff2'))).toEqual([]);
    // The icon font is the subset of the icons the screens name, not the whole set of ~300 (33 KB).
    const icons = fonts.filter((f) => f.includes('primeicons'));
    expect(icons).toHaveLength(1);
    expect(sentBytes(icons[0])).toBeLessThan(10_000);
  });

  it("carries PrimeVue's theme as CSS made at build, not as design tokens made into CSS in the page", () => {
    const read = (f: string) => readFileSync(join(DIST, f), 'utf8');
    // Aura's lightest stone (#fafaf9), one of the preset's tokens: a variable in the style sheet, not in the code.
    expect(crew.scripts.map(read).join('\n')).not.toContain('#fafaf9');
    const css = crew.styles.map(read).join('\n');
    expect(css).toContain('--p-stone-50:#fafaf9');
    expect(css).toMatch(/\.p-button\{[^}]*var\(--p-button-primary-background\)/);
    expect(crew.scripts.filter((f) => f.includes('workbox-window'))).toHaveLength(1);
  });

  it('loads nothing of the board, review, quality or admin screens, nor the chart library', () => {
    const sources = Object.values(manifest).filter((c) => crew.scripts.includes(c.file)).map((c) => c.src ?? c.file);
    const desk = ['InboundBoardView', 'ActivationReviewView', 'CaseTimelineView', 'TriageQualityView', 'PoliciesView', 'PeoplePlacesView', 'MailSentView'];
    expect(sources.filter((s) => desk.some((view) => s.includes(view)))).toEqual([]);
    const code = crew.scripts.map((f) => readFileSync(join(DIST, f), 'utf8')).join('\n');
    expect(code).not.toMatch(/Chart\.js|chartjs|new Chart\(/);
    // The chart library is still in the build, where the quality screen fetches it.
    const quality = firstLoadFiles(manifest, 'src/views/TriageQualityView.vue').scripts.map((f) => readFileSync(join(DIST, f), 'utf8')).join('\n');
    expect(quality).toMatch(/chart/i);
  });
});
