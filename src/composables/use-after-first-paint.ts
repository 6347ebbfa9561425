import { onMounted, ref, type Ref } from 'vue';

/**
 * False until the browser has drawn the screen's first frame, then true: a long screen draws
 * what is needed first (on the crew's form: the first sections and the Send bar), and the rest
 * in the next task, so the first frame, and a tap on Send, do not wait for all of it. The data
 * behind the later part is there from the start; only its drawing waits, for a frame.
 */
export function useAfterFirstPaint(enabled = true): Ref<boolean> {
  const painted = ref(!enabled);
  if (enabled) {
    // requestAnimationFrame runs just before the frame is drawn; the timeout's task comes after it.
    onMounted(() => requestAnimationFrame(() => setTimeout(() => (painted.value = true))));
  }
  return painted;
}
