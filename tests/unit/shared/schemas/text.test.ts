import { describe, expect, it } from 'vitest';
import { cleanText, hasVisibleText, safeText } from '../../../../shared/schemas/text';
import { boundedDate, boundedTime, withinMaxSpan } from '../../../../shared/schemas/dates';
import { CreateUser } from '../../../../shared/schemas/people';
import { CaseCancel } from '../../../../shared/schemas/cases';

// The shared rules for what people type and the dates they ask about.

describe('cleanText', () => {
  it('removes control characters and bidirectional overrides, keeping the letters around them', () => {
    // U+202E (RIGHT-TO-LEFT OVERRIDE) would show "Bay 3" reversed: the Trojan Source trick, CVE-2021-42574.
    expect(cleanText('Ward\u202E3 yaB')).toBe('Ward3 yaB');
    expect(cleanText('Morgan\u0000\u0008 Achterberg\u001B')).toBe('Morgan Achterberg');
    expect(cleanText('\u2066Robin\u2069 Vasquez-Hale')).toBe('Robin Vasquez-Hale');
  });

  it('keeps line breaks and tabs in free text, and turns them into spaces in a name', () => {
    expect(cleanText('Fell 4 m\nGCS 14\tconfused', { lines: true })).toBe('Fell 4 m\nGCS 14\tconfused');
    expect(cleanText('Jules\nOyelaran')).toBe('Jules Oyelaran');
  });

  it('keeps joiners inside words of scripts and emoji that need them', () => {
    expect(cleanText('می\u200Cخواهم')).toBe('می\u200Cخواهم');
    expect(cleanText('👩\u200D⚕️ nurse')).toBe('👩\u200D⚕️ nurse');
  });

  it('gives an empty string for text with nothing visible in it', () => {
    for (const invisible of ['\u200B\u200B', ' \u2060\uFEFF\u00AD ', '\u202E\u2066\u2069', '\u3164\u3164', '\u0000\u0007', '\u034F']) {
      expect(hasVisibleText(invisible), JSON.stringify(invisible)).toBe(false);
      expect(cleanText(invisible)).toBe('');
    }
    expect(hasVisibleText(' a ')).toBe(true);
  });
});

describe('safeText fields', () => {
  it('refuse a name of only invisible characters with the same message as an empty one', () => {
    const base = { email: 'x@plumbline.test', roles: ['quality'], memberships: [{ kind: 'hospital', id: 1 }] };
    for (const name of ['', '   ', '\u200B\u200B\u200B', '\u202E']) {
      const result = CreateUser.safeParse({ ...base, name });
      expect(result.success).toBe(false);
      expect(result.error!.issues[0]).toMatchObject({ path: ['name'], message: 'must not be empty' });
    }
    expect(CreateUser.parse({ ...base, name: '  Kit\u202E Marchetti ' }).name).toBe('Kit Marchetti');
  });

  it('refuse a reason of only invisible characters like a missing one', () => {
    const result = CaseCancel.safeParse({ caseId: 1, reason: '\u200B\u200B\u200B\u200B\u200B' });
    expect(result.error!.issues[0]).toMatchObject({ path: ['reason'], message: 'needs a few words' });
  });

  it('let optional free text be left empty, and hold the length after cleaning', () => {
    const notes = safeText({ max: 5, min: 0, lines: true });
    expect(notes.parse('\u200B')).toBe('');
    expect(notes.parse('ab\u0000\u0000\u0000\u0000cd')).toBe('abcd');
    expect(notes.safeParse('abcdef').success).toBe(false);
  });
});

describe('date bounds', () => {
  it('take days from 2000-01-01 to 2100-12-31 only', () => {
    expect(boundedDate.safeParse('2000-01-01').success).toBe(true);
    expect(boundedDate.safeParse('2100-12-31').success).toBe(true);
    expect(boundedDate.safeParse('1999-12-31').error!.issues[0].message).toBe('must be between 2000-01-01 and 2100-12-31');
    expect(boundedDate.safeParse('2101-01-01').success).toBe(false);
  });

  it('take times within 2000–2100, and refuse what a date cannot hold', () => {
    expect(boundedTime.safeParse(Date.UTC(2026, 5, 1)).success).toBe(true);
    // 8.64e15 ms is the largest time a JavaScript Date holds (ECMA-262, "Time Values and Time Range").
    for (const t of [8.64e15 + 1, Number.MAX_SAFE_INTEGER, Date.UTC(2101, 0, 1), Date.UTC(1999, 11, 31), 0, -1]) expect(boundedTime.safeParse(t).success, String(t)).toBe(false);
  });

  it('hold a range to ten years to the day', () => {
    expect(withinMaxSpan({ from: '2016-12-31', to: '2026-12-31' })).toBe(true);
    expect(withinMaxSpan({ from: '2016-12-31', to: '2027-01-01' })).toBe(false);
    expect(withinMaxSpan({ from: '2020-02-29', to: '2030-02-28' })).toBe(true);
    expect(withinMaxSpan({ from: '2016-01-01' })).toBe(true);
  });
});
