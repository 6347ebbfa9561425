// A form kept on the device, read back over a blank one field by field. Only a value of the kind
// the blank holds is taken: text for text, a list of texts for a list, a choice (text, number,
// yes/no or none) for a choice. A draft kept by an older version, or altered on the device, so
// gives a form that opens, with whatever it had that still fits; it never breaks the screen.

type Plain = Record<string, unknown>;

const isPlain = (value: unknown): value is Plain => typeof value === 'object' && value !== null && !Array.isArray(value);
const isChoice = (value: unknown) => value === null || ['string', 'number', 'boolean'].includes(typeof value);

function fits(blank: unknown, kept: unknown): boolean {
  if (typeof blank === 'string') return typeof kept === 'string';
  if (Array.isArray(blank)) return Array.isArray(kept) && kept.every((item) => typeof item === 'string');
  return isChoice(blank) && isChoice(kept);
}

export function overBlank<T extends object>(blank: T, kept: unknown): T {
  if (!isPlain(kept)) return blank;
  const out: Plain = Object.fromEntries(Object.entries(blank));
  for (const [key, empty] of Object.entries(blank)) {
    const value = kept[key];
    if (isPlain(empty)) out[key] = overBlank(empty, value);
    else if (fits(empty, value)) out[key] = value;
  }
  // Every key of the blank is there, each with the blank's value or one of the same kind.
  return out as T;
}
