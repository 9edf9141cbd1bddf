import { randomBytes } from 'node:crypto';
import { WebSocket, type RawData } from 'ws';
import { LIVE_VERSION, type LiveErrorCode, type ServerMessage } from '../live/live-types.js';
import { readControl } from '../live/control-intake.js';
import { ViewerQueue } from '../live/viewer-queue.js';
import type { FleetChannel } from './fleet-state.js';
import type { FleetCommand, FleetReply } from './payloads.js';

/**
 * Publishes a command for a station's channel, saying which page asked (the station logs it);
 * false when the broker is not connected.
 */
export type CommandSender = (c: FleetCommand, from: string) => boolean;

/** How long a forwarded command waits for the station's reply. */
const REPLY_TIMEOUT_MS = 10_000;
/** Commands awaiting a reply per viewer; more are refused at once. */
const MAX_WAITING = 16;

/**
 * One drill-down page on one channel: the channel's hub messages go out through the live
 * feed's viewer queue (samples coalesced for a slow page), and the page's control messages go
 * to the station through the broker with the control token the user typed. The answer comes
 * back as the live feed's own ack or error.
 */
export class ChannelViewer {
  private readonly queue = new ViewerQueue<string>();
  private readonly unsubscribe: () => void;
  private readonly waiting = new Map<string, { id: string | null; timer: NodeJS.Timeout }>();
  private readonly sweep: NodeJS.Timeout;

  constructor(
    readonly ws: WebSocket,
    private readonly ch: FleetChannel,
    private readonly send: CommandSender,
    /** Who this page is, for the station's log: its viewer's address. */
    private readonly from: string,
  ) {
    this.unsubscribe = ch.hub.subscribe((m) => this.offer(m));
    ws.on('message', (data, isBinary) => this.onMessage(data, isBinary));
    ws.on('error', () => ws.terminate());
    this.sweep = setInterval(() => this.pump(), 200);
    this.sweep.unref();
    this.offer(ch.hub.hello());
  }

  detach(): void {
    this.unsubscribe();
    clearInterval(this.sweep);
    for (const w of this.waiting.values()) clearTimeout(w.timer);
    this.waiting.clear();
  }

  /** A station's reply: answers the page if the command was this page's. */
  reply(r: FleetReply): void {
    const w = r.id === null ? undefined : this.waiting.get(r.id);
    if (!w || r.id === null || r.request === null) return;
    clearTimeout(w.timer);
    this.waiting.delete(r.id);
    if (r.ok) this.offer({ type: 'ack', v: LIVE_VERSION, id: w.id, request: r.request });
    else this.fail(w.id, r.code ?? 'refused', r.error ?? 'refused by the station');
  }

  private offer(m: ServerMessage): void {
    this.queue.offer(JSON.stringify(m), m.type === 'sample');
    this.pump();
  }

  private pump(): void {
    if (this.ws.readyState !== WebSocket.OPEN) return;
    for (;;) {
      const step = this.queue.next(this.ws.bufferedAmount, performance.now());
      if (step === null) return;
      if ('disconnect' in step) return void this.ws.terminate();
      this.ws.send(step.send);
    }
  }

  private fail(id: string | null, code: LiveErrorCode, error: string): void {
    this.offer({ type: 'error', v: LIVE_VERSION, id, code, error });
  }

  private onMessage(data: RawData, isBinary: boolean): void {
    const m = readControl(data, isBinary);
    if (!m.ok) return this.fail(m.id, m.code, m.error);
    const id = m.id;
    if (this.waiting.size >= MAX_WAITING)
      return this.fail(id, 'refused', 'too many requests are waiting for the station');
    const wireId = randomBytes(12).toString('hex');
    const head = {
      v: 1 as const,
      station: this.ch.station,
      channel: this.ch.channel,
      token: m.message.token,
      id: wireId,
    };
    const cmd: FleetCommand = { ...head, ...m.request };
    if (!this.send(cmd, this.from))
      return this.fail(id, 'refused', 'the fleet view is not connected to the broker');
    const timer = setTimeout(() => {
      this.waiting.delete(wireId);
      this.fail(
        id,
        'refused',
        `no answer from station ${this.ch.station} within ${REPLY_TIMEOUT_MS / 1000} s`,
      );
    }, REPLY_TIMEOUT_MS);
    this.waiting.set(wireId, { id, timer });
  }
}
