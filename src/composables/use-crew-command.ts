import { ref } from 'vue';
import { connection } from '../api/socket';

/**
 * A crew command sent from a dialog (an update, a cancel, a redirect). It needs the server's
 * answer, so without signal it is refused at once with `noSignal`; while it goes the dialog is
 * busy; a refusal shows the server's message. `run` gives the answer, or null when there is none.
 */
export function useCrewCommand(noSignal: string) {
  const sending = ref(false);
  const failure = ref<string | null>(null);
  async function run<T>(command: () => Promise<T>): Promise<T | null> {
    if (!connection.connected.value) {
      failure.value = noSignal;
      return null;
    }
    sending.value = true;
    try {
      return await command();
    } catch (err) {
      failure.value = (err as Error).message;
      return null;
    } finally {
      sending.value = false;
    }
  }
  return { sending, failure, run };
}
