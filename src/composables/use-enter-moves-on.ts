// On a phone keypad the Enter key reads "Next": in a form it moves to the next field and never
// sends. The browser's own rule (Enter in a text field submits the form) sent half-filled
// pre-alerts; only the Send button sends.

const FIELDS = 'input:not([type="hidden"]):not([disabled]), select:not([disabled]), textarea:not([disabled]), button:not([disabled]):not([type="submit"])';

function visible(el: HTMLElement): boolean {
  return el.offsetParent !== null || el.getClientRects().length > 0;
}

/** A keydown handler for a form: Enter in a field moves the focus on instead of submitting. */
export function moveOnEnter(event: KeyboardEvent): void {
  if (event.key !== 'Enter' || event.isComposing || event.altKey || event.ctrlKey || event.metaKey) return;
  const target = event.target as HTMLElement | null;
  if (!target || !(target instanceof HTMLInputElement || target instanceof HTMLSelectElement)) return;
  event.preventDefault();
  const form = target.closest('form');
  if (!form) return;
  const fields = [...form.querySelectorAll<HTMLElement>(FIELDS)].filter(visible);
  // Past a group of radio buttons or segments the next field is the next group's first.
  const start = fields.indexOf(target);
  const next = fields.slice(start + 1).find((el) => !(el instanceof HTMLInputElement && el.type === 'radio' && el.name === (target as HTMLInputElement).name));
  next?.focus();
}
