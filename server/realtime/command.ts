import type { Logger } from 'pino';
import type { z } from 'zod';
import type { Me } from '../../shared/roles';
import type { CommandAnswer, CommandListener, CommandName, CommandPayload } from '../../shared/realtime/events';
import { parseOr400 } from '../errors';
import { ackError, type RealtimeSocket } from '.';

/** How one command is handled: who may send it, the schema its payload must pass, and the work. */
export interface CommandHandler<E extends CommandName> {
  /** Throws (forbidden) when this person may not send the command. */
  allow(me: Me): void;
  schema: z.ZodType<CommandPayload<E>>;
  run(payload: CommandPayload<E>): Promise<CommandAnswer<E>>;
}

// socket.io types an event's listener only when it is named by its literal: one line per command
// here lets onCommand stay generic. A command added to the map in shared/realtime/events.ts
// without its line here does not compile.
const listenFor: { [E in CommandName]: (socket: RealtimeSocket, listener: CommandListener<E>) => void } = {
  'case:submit': (socket, listener) => socket.on('case:submit', listener),
  'case:update': (socket, listener) => socket.on('case:update', listener),
  'case:cancel': (socket, listener) => socket.on('case:cancel', listener),
  'case:redirect': (socket, listener) => socket.on('case:redirect', listener),
};

/**
 * Registers a command on one connection: the caller's role is checked, the payload parsed with the
 * shared schema (400 naming the field), and the answer or the refusal goes back through the
 * acknowledgement; only our own error messages leave (`ackError`). A command sent without an
 * acknowledgement is ignored: nobody would hear the answer.
 */
export function onCommand<E extends CommandName>(socket: RealtimeSocket, logger: Logger, event: E, handler: CommandHandler<E>): void {
  listenFor[event](socket, (raw, ack) => {
    if (typeof ack !== 'function') return;
    void (async () => {
      try {
        handler.allow(socket.data.me);
        ack({ ok: true, data: await handler.run(parseOr400(handler.schema, raw)) });
      } catch (err) {
        ack(ackError(err, logger, socket.data.me));
      }
    })();
  });
}
