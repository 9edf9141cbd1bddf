/**
 * One viewer's outgoing queue. A viewer that keeps up gets every message at once; one that
 * falls behind gets its samples coalesced (only the newest waits) while state changes, alarms
 * and results queue in order; one that stays behind, or whose queue passes its bounds, is cut
 * off. Pure: the caller supplies the socket's buffered byte count and the time.
 */
export interface ViewerQueueOptions {
  /** Below this many bytes buffered on the socket the viewer counts as keeping up. @default 65536 */
  lowWaterBytes?: number;
  /** Bytes buffered on the socket past which the viewer is cut off at once. @default 1048576 */
  maxBufferedBytes?: number;
  /** Bytes of non-sample messages allowed to wait; more cuts the viewer off. @default 1048576 */
  maxQueuedBytes?: number;
  /** A viewer behind for longer than this is cut off. @default 30000 */
  stallMs?: number;
}

export type QueueStep<T> = { send: T } | { disconnect: string } | null;

/**
 * Items are strings or anything that knows its length in UTF-16 code units; a lazily
 * serialised message is only turned into text when its length is asked for or it is sent.
 */
export class ViewerQueue<T extends { readonly length: number } = string> {
  private readonly lowWater: number;
  private readonly maxBuffered: number;
  private readonly maxQueuedBytes: number;
  private readonly stallMs: number;
  private queue: T[] = [];
  private queuedBytes = 0;
  private pendingSample: T | null = null;
  private behindSince: number | null = null;
  /** Samples replaced by a newer one before they could be sent. */
  coalesced = 0;

  constructor(o: ViewerQueueOptions = {}) {
    this.lowWater = o.lowWaterBytes ?? 64 * 1024;
    this.maxBuffered = o.maxBufferedBytes ?? 1024 * 1024;
    this.maxQueuedBytes = o.maxQueuedBytes ?? 1024 * 1024;
    this.stallMs = o.stallMs ?? 30_000;
  }

  /** Messages waiting (queued plus a coalesced sample). */
  get length(): number {
    return this.queue.length + (this.pendingSample === null ? 0 : 1);
  }

  /** Bytes held for this viewer, as the items' lengths count them. */
  get bytes(): number {
    return this.queuedBytes + (this.pendingSample?.length ?? 0);
  }

  offer(data: T, isSample: boolean): void {
    if (isSample) {
      if (this.pendingSample !== null) this.coalesced++;
      this.pendingSample = data;
      return;
    }
    // Keep order: a sample that arrived before this message goes out before it.
    if (this.pendingSample !== null) {
      this.push(this.pendingSample);
      this.pendingSample = null;
    }
    this.push(data);
  }

  /** The next message to send now, a reason to cut the viewer off, or null to wait. */
  next(bufferedBytes: number, nowMs: number): QueueStep<T> {
    if (bufferedBytes > this.maxBuffered)
      return { disconnect: `more than ${this.maxBuffered} bytes waiting on the socket` };
    if (this.queuedBytes > this.maxQueuedBytes)
      return { disconnect: `more than ${this.maxQueuedBytes} bytes of messages waiting` };
    if (bufferedBytes > this.lowWater) {
      this.behindSince ??= nowMs;
      if (nowMs - this.behindSince > this.stallMs)
        return { disconnect: `not reading for more than ${Math.round(this.stallMs / 1000)} s` };
      return null;
    }
    this.behindSince = null;
    const head = this.queue.shift();
    if (head !== undefined) {
      this.queuedBytes -= head.length;
      return { send: head };
    }
    if (this.pendingSample !== null) {
      const s = this.pendingSample;
      this.pendingSample = null;
      return { send: s };
    }
    return null;
  }

  private push(data: T): void {
    this.queue.push(data);
    this.queuedBytes += data.length;
  }
}
