import { connection } from '@/api/socket';
import { useBusyAction } from './use-busy-action';

/**
 * A crew command sent from a dialog (an update, a cancel, a redirect). It needs the server's
 * answer, so without signal it is refused at once with `noSignal`; otherwise it is a busy action.
 */
export function useCrewCommand(noSignal: string) {
  const { busy: sending, failure, run: send } = useBusyAction();
  async function run<T>(command: () => Promise<T>): Promise<T | null> {
    if (!connection.connected.value) {
      failure.value = noSignal;
      return null;
    }
    return send(command);
  }
  return { sending, failure, run };
}
