/**
 * Runs `work` once the browser has a moment with nothing else to do, and at most `within` ms
 * later: work a screen starts as it opens (asking the server, opening the live link) waits for
 * the screen to be drawn and ready for a tap, rather than lengthening its first task. A browser
 * without idle callbacks runs it in the task after the next frame.
 */
export function whenIdle(work: () => void, within = 300): void {
  if (typeof requestIdleCallback === 'function') requestIdleCallback(() => work(), { timeout: within });
  else requestAnimationFrame(() => setTimeout(work));
}
