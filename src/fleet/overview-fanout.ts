import type { Duplex } from 'node:stream';
import { WebSocket } from 'ws';
import { textFrame } from '../live/ws-frame.js';

/** Bytes waiting on an overview socket past which its updates wait (newest per tile wins). */
const LOW_WATER = 64 * 1024;
/** Past this the overview viewer is cut off: it is not reading. */
const CUT_OFF = 1024 * 1024;

interface OverviewViewer {
  ws: WebSocket;
  /** The connection, which a flush writes its frames to in one write (see ws-frame.ts). */
  socket: Duplex;
  /** Newest message per tile or station, in the order first changed: bounded by the fleet's size. */
  pending: Map<string, Buffer>;
  /** The socket is corked until the broker messages being handled now are all handled. */
  corked: boolean;
}

/**
 * The fleet overview pages and how updates reach them: at once to a page that keeps up; to one
 * behind, only the newest update of each tile, when its socket has drained; a page that stops
 * reading is cut off.
 */
export class OverviewFanout {
  private readonly viewers = new Set<OverviewViewer>();
  private immediate: NodeJS.Immediate | null = null;
  private readonly sweep: NodeJS.Timeout;

  constructor(private readonly log: (name: string, detail: Record<string, unknown>) => void) {
    // Overview viewers that fell behind are retried even when nothing new comes.
    this.sweep = setInterval(() => this.viewers.size > 0 && this.flush(), 200);
    this.sweep.unref();
  }

  get size(): number {
    return this.viewers.size;
  }

  /** A new overview page; it takes no messages, and gets the whole fleet first. */
  attach(ws: WebSocket, socket: Duplex, snapshot: unknown): void {
    const v: OverviewViewer = { ws, socket, pending: new Map(), corked: false };
    this.viewers.add(v);
    ws.on('close', () => this.viewers.delete(v));
    ws.on('error', () => ws.terminate());
    ws.on('message', () =>
      ws.close(1008, 'the overview takes no messages; control is on a channel page'),
    );
    ws.send(JSON.stringify(snapshot));
  }

  /** An update of one tile or station, `key` naming which. */
  offer(key: string, m: unknown): void {
    if (this.viewers.size === 0) return;
    const frame = textFrame(Buffer.from(JSON.stringify(m)));
    for (const v of this.viewers) {
      // A page that keeps up gets the update at once; one behind gets the newest per tile later.
      if (v.pending.size === 0 && v.ws.bufferedAmount <= LOW_WATER && v.socket.writable) {
        this.writeNow(v, frame);
        continue;
      }
      v.pending.delete(key);
      v.pending.set(key, frame);
      this.immediate ??= setImmediate(() => this.flush());
    }
  }

  /**
   * Writes at once, but the updates of one read from the broker (a station's channels come
   * together) leave in one write: the socket is corked until the microtasks run, which is after
   * the MQTT client has handled every message of that read (it takes them one per tick) and
   * before the event loop turns. No timer, no wait for the next turn; one system call and one
   * wake-up of the page for the lot instead of one per tile.
   */
  private writeNow(v: OverviewViewer, frame: Buffer): void {
    if (!v.corked) {
      v.corked = true;
      v.socket.cork();
      queueMicrotask(() => {
        v.corked = false;
        v.socket.uncork();
      });
    }
    v.socket.write(frame);
  }

  /** Stops the timers and asks every page to close. */
  close(why: string): void {
    clearInterval(this.sweep);
    if (this.immediate) clearImmediate(this.immediate);
    for (const v of this.viewers) v.ws.close(1001, why);
  }

  private flush(): void {
    this.immediate = null;
    for (const v of this.viewers) {
      if (v.ws.readyState !== WebSocket.OPEN) continue;
      if (v.ws.bufferedAmount > CUT_OFF) {
        this.log('fleet_viewer_dropped', { why: `more than ${CUT_OFF} bytes waiting` });
        v.ws.terminate();
        continue;
      }
      if (v.ws.bufferedAmount > LOW_WATER || v.pending.size === 0 || !v.socket.writable) continue;
      // Every update of this turn in one write: one system call, not one per tile.
      v.socket.write(Buffer.concat([...v.pending.values()]));
      v.pending.clear();
    }
  }
}
