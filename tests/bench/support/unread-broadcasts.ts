// The socket.io parser for the simulated crews' sockets (and the echo's senders): it drops the
// broadcasts unread. A crew's phone parses its agency's broadcasts on its own processor; the two
// hundred simulated here share one with the boards that are timed, and none of them looks at a
// broadcast (they act on their acknowledgements only). The server writes every copy as before.
import { Decoder, Encoder, PacketType } from 'socket.io-parser';

class BroadcastSkippingDecoder extends Decoder {
  override add(chunk: unknown): void {
    // An event packet's text starts with its type's digit; acknowledgements and connects go on.
    if (typeof chunk === 'string' && chunk.charCodeAt(0) === 48 + PacketType.EVENT) return;
    super.add(chunk as never);
  }
}

export const unreadBroadcasts = { Encoder, Decoder: BroadcastSkippingDecoder };
