import { onBeforeUnmount, onMounted, ref, type Ref } from 'vue';

/**
 * How many of a long screen's later parts are drawn: none at first, then one more after each
 * frame the browser draws. The screen shows what is needed first in its first frame (on the
 * crew's form: the destination, the patient and the Send bar), and each later part comes in a
 * task of its own, so a tap on Send waits for one part at most, never for the whole form. The
 * data behind the later parts is there from the start; only their drawing waits.
 */
export function useDrawnInSteps(steps: number): Ref<number> {
  const drawn = ref(0);
  let frame = 0;
  let timer: ReturnType<typeof setTimeout> | undefined;
  // requestAnimationFrame runs just before a frame is drawn; the timeout's task comes after it.
  const next = () => {
    frame = requestAnimationFrame(() => {
      timer = setTimeout(() => {
        drawn.value += 1;
        if (drawn.value < steps) next();
      });
    });
  };
  onMounted(next);
  onBeforeUnmount(() => {
    cancelAnimationFrame(frame);
    clearTimeout(timer);
  });
  return drawn;
}
