import type { ServerMessage } from './live-types.js';
import { textFrame } from './ws-frame.js';

/**
 * A message on its way to viewers: serialised once for all of them, and only when one of them
 * is actually sent it. Samples that a viewer's queue coalesces away are never serialised.
 */
export class Outgoing {
  private bytes: Buffer | null = null;
  private framed: Buffer | null = null;

  constructor(readonly message: ServerMessage) {}

  /** Samples and station overviews: only the newest is worth sending to a viewer behind. */
  get isSample(): boolean {
    return this.message.type === 'sample' || this.message.type === 'station';
  }

  /** UTF-8 bytes of the JSON text, made once however many viewers get them. */
  get data(): Buffer {
    return (this.bytes ??= Buffer.from(JSON.stringify(this.message)));
  }

  /** The whole WebSocket frame, the same bytes for every viewer. */
  get frame(): Buffer {
    return (this.framed ??= textFrame(this.data));
  }

  /** What the viewer queue counts its bounds in. */
  get length(): number {
    return this.data.length;
  }
}
