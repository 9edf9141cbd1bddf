import { performance } from 'node:perf_hooks';
import type { Duplex } from 'node:stream';
import { WebSocket } from 'ws';
import type { Clock } from '../core/clock.js';
import type { LiveFeedEvent } from '../record/events.js';
import type { ViewerFeed } from './feed-router.js';
import type { ServerMessage } from './live-types.js';
import { Outgoing } from './outgoing.js';
import type { ViewerQueue } from './viewer-queue.js';

/** Shortest gap between two sample sends, ms: at most 100 samples a second reach a viewer. */
const SAMPLE_GAP_MS = 10;

export interface Viewer {
  ws: WebSocket;
  feed: ViewerFeed;
  /** The viewer's connection, which broadcast frames are written to directly (see ws-frame.ts). */
  socket: Duplex;
  queue: ViewerQueue<Outgoing>;
  remote: string;
  alive: boolean;
}

export interface ViewerStats {
  remote: string;
  queued: number;
  queuedBytes: number;
  bufferedAmount: number;
  coalesced: number;
}

/**
 * The viewers of one server and the way messages reach them: each through its own bounded
 * queue, which holds back while the socket is behind and cuts off a viewer that stays behind.
 *
 * Sends happen once per event-loop turn: a burst of samples read in one chunk from the rig
 * reaches each viewer as its newest sample, in one socket write, instead of one write each.
 * Samples go out at most every SAMPLE_GAP_MS as well: no page draws faster, and a socket
 * write costs the daemon more than a frame does. Everything else goes out in the same turn.
 */
export class ViewerFanout {
  readonly viewers = new Set<Viewer>();
  private readonly dirty = new Set<Viewer>();
  private immediate: NodeJS.Immediate | null = null;
  private later: NodeJS.Timeout | null = null;
  private lastFlushAt = -Infinity;

  constructor(
    private readonly clock: Clock,
    private readonly log: (e: LiveFeedEvent) => void,
  ) {}

  /** Writes what each viewer with news may take now. */
  flush(): void {
    if (this.immediate) clearImmediate(this.immediate);
    if (this.later) clearTimeout(this.later);
    this.immediate = this.later = null;
    this.lastFlushAt = performance.now();
    for (const v of this.dirty) this.pump(v);
    this.dirty.clear();
  }

  /** A message for one viewer (its hello, an answer to its request). */
  send(v: Viewer, m: ServerMessage): void {
    const out = new Outgoing(m);
    this.offer(v, out);
    this.schedule(out);
  }

  /** One message to every viewer that wants it, serialised at most once. */
  broadcast(m: ServerMessage, wants: (v: Viewer) => boolean): void {
    let out: Outgoing | null = null;
    for (const v of this.viewers) {
      if (!wants(v)) continue;
      out ??= new Outgoing(m);
      this.offer(v, out);
    }
    if (out) this.schedule(out);
  }

  /** Retries every viewer's queue: one that fell behind gets what waits once it catches up. */
  sweep(): void {
    this.viewers.forEach((v) => this.pump(v));
  }

  /** Pings every viewer; one that did not answer the previous ping is cut off. */
  ping(): void {
    for (const v of this.viewers) {
      if (!v.alive) {
        this.log({ event: 'live_viewer_dropped', remote: v.remote, why: 'no answer to ping' });
        v.ws.terminate();
        continue;
      }
      v.alive = false;
      v.ws.ping();
    }
  }

  stats(): ViewerStats[] {
    return [...this.viewers].map((v) => ({
      remote: v.remote,
      queued: v.queue.length,
      queuedBytes: v.queue.bytes,
      bufferedAmount: v.ws.bufferedAmount,
      coalesced: v.queue.coalesced,
    }));
  }

  private offer(v: Viewer, out: Outgoing): void {
    v.queue.offer(out, out.isSample);
    this.dirty.add(v);
  }

  /** Once per message, however many viewers it was offered to. */
  private schedule(out: Outgoing): void {
    const wait = out.isSample ? this.lastFlushAt + SAMPLE_GAP_MS - performance.now() : 0;
    if (wait <= 0) this.immediate ??= setImmediate(() => this.flush());
    else if (!this.immediate) this.later ??= setTimeout(() => this.flush(), wait);
  }

  private pump(v: Viewer): void {
    if (v.ws.readyState !== WebSocket.OPEN) return;
    for (;;) {
      const step = v.queue.next(v.ws.bufferedAmount, this.clock.now());
      if (step === null) return;
      if ('disconnect' in step) {
        this.log({ event: 'live_viewer_dropped', remote: v.remote, why: step.disconnect });
        v.ws.terminate();
        return;
      }
      // Whole frames on the open connection, in order with the library's own (pings, close).
      if (!v.socket.writable) return;
      v.socket.write(step.send.frame);
    }
  }
}
