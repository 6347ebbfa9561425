import { z } from 'zod';

// What people type, made safe to keep and to show. Control characters (a NUL, an escape, a form
// feed) are removed; free text keeps its tabs and line breaks, a name keeps none. Bidirectional
// embeddings, overrides and isolates are removed, so a name cannot show one thing and say another
// (the "Trojan Source" trick: CVE-2021-42574). Text with nothing a reader can see in it (spaces,
// zero-width joiners, soft hyphens, fillers) counts as empty, so it is refused wherever an empty
// value is.

// C0 and C1 controls and DEL, but not tab, line feed or carriage return.
const CONTROLS = /[\u0000-\u0008\u000B\u000C\u000E-\u001F\u007F-\u009F]/g;
const LINE_BREAKS_AND_TABS = /[\t\n\r\u2028\u2029]+/g;
// LRE, RLE, PDF, LRO, RLO and LRI, RLI, FSI, PDI.
const BIDI_CONTROLS = /[\u202A-\u202E\u2066-\u2069]/g;
// Something a reader sees: not a space, a format character, a lone combining mark or a filler.
const VISIBLE = /[^\s\p{Cc}\p{Cf}\p{Mn}\p{Me}\p{Zl}\p{Zp}\u115F\u1160\u3164\uFFA0\u2800]/u;

export function hasVisibleText(value: string): boolean {
  return VISIBLE.test(value);
}

/** The text without controls and bidirectional overrides; '' when nothing visible is left. */
export function cleanText(value: string, opts: { lines?: boolean } = {}): string {
  let out = value.replace(BIDI_CONTROLS, '').replace(CONTROLS, '');
  if (!opts.lines) out = out.replace(LINE_BREAKS_AND_TABS, ' ');
  return hasVisibleText(out) ? out : '';
}

export interface TextRules {
  max: number;
  /** Fewest characters once cleaned and trimmed; 0 lets the text be left empty. */
  min?: number;
  /** Free text that may run over several lines (notes, comments); a name or reason is one line. */
  lines?: boolean;
  /** The message for text that is empty, invisible or shorter than `min`. */
  tooShort?: string;
}

/** A string field that is cleaned, trimmed, and then held to its length. */
export function safeText({ max, min = 1, lines = false, tooShort = 'must not be empty' }: TextRules) {
  const base = z.string({ error: 'must be text' }).overwrite((value) => cleanText(value, { lines })).trim();
  return (min > 0 ? base.min(min, { error: tooShort }) : base).max(max, { error: `must be at most ${max} characters` });
}
