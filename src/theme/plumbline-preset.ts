import { definePreset } from '@primeuix/themes';
import Aura from '@primeuix/themes/aura';
import type { StyledTheme } from './theme-css';

// The preset is read at build only (src/theme/theme-css.ts makes its CSS): the page carries
// neither Aura's tokens nor ours, so starting from the whole of Aura costs the phone nothing,
// and a component added to a screen gets its style with no list to keep here.

// Aura supplies the component structure; everything a person sees as colour, type size and
// shape comes from here. Chosen for a dim room late in a night shift: a deep ink blue for
// actions, warm paper-like neutrals instead of cold greys, and no text below 4.5:1.
// The two scales are set as the semantic primary and surface palettes (the preset type allows
// no new primitives), so our own CSS reads them as --p-primary-* and --p-surface-*.

/** Deep blue-slate, used for actions, links, focus and selection. */
const ink = {
  50: '#f2f5f9',
  100: '#e1e8f1',
  200: '#c5d2e2',
  300: '#9db2cc',
  400: '#6f8bb0',
  500: '#4c6a93',
  600: '#3a5479',
  700: '#2e4463',
  800: '#253751',
  900: '#1c2a3f',
  950: '#111a28',
};

/** Warm neutrals for surfaces, borders and body text. */
const linen = {
  0: '#ffffff',
  50: '#faf8f5',
  100: '#f3f0eb',
  200: '#e6e1d9',
  300: '#d3ccc1',
  400: '#a9a092',
  500: '#7d7467',
  600: '#5f574c',
  700: '#4a433a',
  800: '#332e28',
  900: '#231f1b',
  950: '#161310',
};

export const plumblinePreset = definePreset(Aura, {
  primitive: {
    borderRadius: { none: '0', xs: '2px', sm: '3px', md: '5px', lg: '8px', xl: '12px' },
  },
  semantic: {
    typography: { fontFamily: 'inherit', fontSize: '1rem', lineHeight: '1.5' },
    transitionDuration: '0.15s',
    iconSize: '1rem',
    focusRing: {
      width: '3px',
      style: 'solid',
      color: 'light-dark({primary.600}, {primary.300})',
      offset: '2px',
      shadow: 'none',
    },
    primary: {
      ...ink,
      color: 'light-dark({primary.700}, {primary.300})',
      contrastColor: 'light-dark(#ffffff, {primary.950})',
      hoverColor: 'light-dark({primary.800}, {primary.200})',
      activeColor: 'light-dark({primary.900}, {primary.100})',
    },
    surface: linen,
    text: {
      color: 'light-dark({surface.900}, {surface.50})',
      hoverColor: 'light-dark({surface.950}, {surface.0})',
      // Aura's muted text is too faint to read on a dimmed screen; one step darker passes 4.5:1.
      mutedColor: 'light-dark({surface.600}, {surface.300})',
      hoverMutedColor: 'light-dark({surface.700}, {surface.200})',
    },
    highlight: {
      background: 'light-dark({primary.100}, color-mix(in srgb, {primary.300}, transparent 80%))',
      focusBackground: 'light-dark({primary.200}, color-mix(in srgb, {primary.300}, transparent 70%))',
      color: 'light-dark({primary.900}, {surface.0})',
      focusColor: 'light-dark({primary.950}, {surface.0})',
    },
    formField: {
      fontSize: '1rem',
      paddingX: '0.75rem',
      paddingY: '0.5rem',
      borderColor: 'light-dark({surface.500}, {surface.400})',
      hoverBorderColor: 'light-dark({surface.700}, {surface.300})',
      color: 'light-dark({surface.900}, {surface.50})',
      placeholderColor: 'light-dark({surface.600}, {surface.300})',
      floatLabelColor: 'light-dark({surface.600}, {surface.300})',
      // Inputs get the same visible ring as every other control instead of a border tint only.
      focusRing: {
        width: '3px',
        style: 'solid',
        color: 'light-dark({primary.600}, {primary.300})',
        offset: '1px',
        shadow: 'none',
      },
    },
  },
});

/** The theme PrimeVue's CSS is made from at build (vite.config.ts). */
export const plumblineTheme: StyledTheme = {
  preset: plumblinePreset,
  options: {
    // Dark mode is opt-in by class, never by the operating system: a wall screen or a shared
    // desk PC must not change look because of someone else's setting.
    darkModeSelector: '.plumbline-dark',
    // The element defaults in src/assets/base.css (layer base) come before PrimeVue's rules, so
    // they never restyle a component.
    cssLayer: { name: 'primevue', order: 'base, primevue' },
  },
};
