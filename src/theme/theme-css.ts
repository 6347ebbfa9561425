// PrimeVue's styled mode makes its CSS in the page as it starts: it turns every design token of
// the preset into a CSS variable, fills each component's style rules with them and adds the
// result as <style> elements, before the first paint. Plumbline's preset never changes while the
// app runs, so this plugin makes the same CSS at build, with PrimeVue's own functions, into
// ordinary style sheets; the page runs PrimeVue with `theme: 'none'` and carries neither the
// tokens nor the rules' source (see DEVELOPERS.md, "Add a screen").
//
// - `virtual:primevue-theme/base.css` (imported by src/main.ts): the layer order, the tokens'
//   variables and the global rules, in the entry's style sheet.
// - Each component's rules and variables go with the component: PrimeVue's style modules import
//   their rules from `@primeuix/styles/<name>`; in the build that import becomes the component's
//   made CSS, so a screen's style sheet holds the components it uses and no others.
// The development server has no chunks to split by: `base.css` holds every component there.
import { readdirSync } from 'node:fs';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { css, Theme } from '@primeuix/styled';
import { minifyCSS } from '@primeuix/utils/object';
import type { Plugin } from 'vite';

/** What `app.use(PrimeVue, { theme })` would take: the preset and PrimeVue's theme options. */
export interface StyledTheme {
  preset: object;
  options: { prefix?: string; darkModeSelector?: string; cssLayer?: { name: string; order: string } };
}

/** PrimeVue's style module of a component (`primevue/<name>/style`), as far as this file reads it. */
interface ComponentStyle {
  name: string;
  style?: unknown;
  getCommonTheme(): { primitive?: { css?: string }; semantic?: { css?: string }; global?: { css?: string }; style?: unknown } | undefined;
  getComponentTheme(): { css?: string; style?: unknown } | undefined;
  getDirectiveTheme(): { css?: string; style?: unknown } | undefined;
  getLayerOrderThemeCSS(): string;
}

const require = createRequire(import.meta.url);
const PREFIX = 'virtual:primevue-theme/';
const STYLE_SOURCE = /^@primeuix\/styles\/([a-z]+)$/;

/** A style value (text, or a function of the tokens) as text, the way PrimeVue resolves it. */
const text = (value: unknown): string => (value ? String(css`${value}`) : '');

async function styleModule(name: string): Promise<ComponentStyle> {
  const module = name === 'base' ? await import('@primevue/core/base/style') : await import(`primevue/${name}/style`);
  return module.default as ComponentStyle;
}

/** The layer order, the tokens' variables and the global rules: what PrimeVue adds at start. */
async function commonCss(): Promise<string> {
  const base = await styleModule('base');
  const { primitive, semantic, global, style } = base.getCommonTheme() ?? {};
  return [
    `${base.getLayerOrderThemeCSS()};`,
    text(primitive?.css),
    text(semantic?.css),
    text(global?.css),
    Theme.transformCSS('global-style', text(base.style) + text(style)),
  ].map((sheet) => minifyCSS(sheet) ?? '').join('\n');
}

/** One component's variables and rules: what PrimeVue adds when the component first mounts. */
async function componentCss(name: string): Promise<string> {
  const component = await styleModule(name);
  // A directive's style module is named `<name>-directive`, and its tokens are looked up as such.
  const { css: variables, style } = (component.name.endsWith('-directive') ? component.getDirectiveTheme() : component.getComponentTheme()) ?? {};
  return [text(variables), Theme.transformCSS(`${component.name}-style`, text(component.style) + text(style))]
    .map((sheet) => minifyCSS(sheet) ?? '')
    .filter((sheet) => sheet.trim() !== '')
    .join('\n');
}

/** Every component that has a style module, for the development server. */
function allComponents(): string[] {
  const root = dirname(require.resolve('primevue'));
  return readdirSync(root, { withFileTypes: true })
    .filter((entry) => entry.isDirectory() && readdirSync(join(root, entry.name)).includes('style'))
    .map((entry) => entry.name);
}

export function primevueThemeCss(theme: StyledTheme): Plugin {
  let serving = false;
  const made = new Map<string, Promise<string>>();
  const cssOf = (name: string) => {
    if (!made.has(name)) made.set(name, name === 'base' ? commonCss() : componentCss(name));
    return made.get(name)!;
  };
  return {
    name: 'plumbline-primevue-theme-css',
    // Before Vite's own resolver, which would find the rules' source in node_modules.
    enforce: 'pre',
    configResolved(config) {
      serving = config.command === 'serve';
      Theme.setTheme(theme);
      made.clear();
    },
    resolveId(source) {
      if (source.startsWith(PREFIX) && source.endsWith('.css')) return `\0${source}`;
      // The development server pre-bundles PrimeVue as it is; there base.css carries everything.
      const rules = serving ? null : STYLE_SOURCE.exec(source);
      return rules ? `\0${PREFIX}${rules[1]}.js` : null;
    },
    async load(id) {
      if (!id.startsWith(`\0${PREFIX}`)) return null;
      const name = id.slice(PREFIX.length + 1).replace(/\.(css|js)$/, '');
      if (id.endsWith('.js')) {
        // The rules' source is not needed at run time any more: the component brings its CSS.
        const sheet = name === 'base' || (await cssOf(name)) === '' ? '' : `import '${PREFIX}${name}.css';\n`;
        return `${sheet}export const style = '';\n`;
      }
      if (name !== 'base') return cssOf(name);
      if (!serving) return cssOf('base');
      const all = await Promise.all(allComponents().map(cssOf));
      return [await cssOf('base'), ...all].join('\n');
    },
  };
}
