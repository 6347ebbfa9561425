import { ref } from 'vue';

/**
 * A form's one action that goes to the server (save, send): `busy` while it goes, the server's
 * refusal in `failure`. `run` gives the answer, or null when there is none.
 */
export function useBusyAction() {
  const busy = ref(false);
  const failure = ref<string | null>(null);
  async function run<T>(action: () => Promise<T>): Promise<T | null> {
    busy.value = true;
    try {
      return await action();
    } catch (err) {
      failure.value = err instanceof Error ? err.message : String(err);
      return null;
    } finally {
      busy.value = false;
    }
  }
  return { busy, failure, run };
}
