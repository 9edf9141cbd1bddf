import { WebSocket } from 'ws';
import type { Clock, TimerHandle } from '../core/clock.js';
import { HostClock } from '../core/host-clock.js';
import { ErrorCodes, makeError, type CellvigilError } from '../core/errors.js';
import type { ServerMessage } from './live-types.js';
import { checkServerMessage } from './message-schemas.js';

export interface WatchClientOptions {
  /** ws:// or wss:// address of /live. */
  url: string;
  onMessage: (m: ServerMessage) => void;
  /** Connection news for the status line: 'live', 'reconnecting in 4 s', … */
  onLink: (text: string) => void;
  clock?: Clock;
  /** @default 500 */
  backoffMinMs?: number;
  /** @default 15000 */
  backoffMaxMs?: number;
  /**
   * How long a first connection is tried before giving up: an address that never answered is
   * most likely wrong. Once connected, a lost feed is retried for as long as the viewer runs.
   * @default 10000
   */
  firstConnectMs?: number;
}

export interface WatchClient {
  stop(): void;
  /** Resolves after stop(); rejects when the daemon refuses the viewer (a wrong token, a wrong address). */
  done: Promise<void>;
}

/**
 * A live-feed connection that comes back by itself: after a drop or a daemon restart it
 * retries with doubling delays (with jitter) up to a ceiling. A refusal (401, 403, 404) ends
 * it, since retrying cannot help, and so does an address that never answered within
 * `firstConnectMs`.
 */
const FIRST_CONNECT_MS = 10_000;

function unreachable(url: string, why: string, ms: number): CellvigilError {
  const reason =
    why === 'ECONNREFUSED'
      ? 'nothing listens there (connection refused)'
      : why === 'ENOTFOUND' || why === 'EAI_AGAIN'
        ? 'the host name is not known'
        : why === 'EHOSTUNREACH' || why === 'ENETUNREACH'
          ? 'the host cannot be reached'
          : why;
  return makeError(
    ErrorCodes.WATCH_UNREACHABLE,
    `no live feed answered within ${Math.round(ms / 1000)} s: ${reason}`,
    url.replace(/token=[^&]*/, 'token=…'),
    'Check the address and port the daemon printed at start (its "live" line), that the run is still going, and that it listens beyond loopback (--listen 0.0.0.0:8507) when watching from another machine.',
  );
}

export function watchLive(o: WatchClientOptions): WatchClient {
  const c = new WatchConnection(o);
  c.connect();
  return { stop: () => c.stop(), done: c.done };
}

/** Why the daemon refused a viewer, for the HTTP statuses retrying cannot help. */
function refused(url: string, status: number): CellvigilError {
  const why =
    status === 401
      ? ': viewer token missing or wrong'
      : status === 404
        ? ': no live feed at this address'
        : '';
  return makeError(
    ErrorCodes.WATCH_REFUSED,
    `the daemon refused this viewer (HTTP ${status}${why})`,
    url.replace(/token=[^&]*/, 'token=…'),
    status === 401
      ? 'Pass the viewer token with --token (see docs/live-feed.md).'
      : 'Check the address the daemon printed.',
  );
}

/** The one connection of a watch, redialled after each drop until stopped or refused. */
class WatchConnection {
  readonly done: Promise<void>;
  private readonly clock: Clock;
  private readonly minMs: number;
  private readonly maxMs: number;
  private readonly firstMs: number;
  private ws: WebSocket | null = null;
  private timer: TimerHandle | null = null;
  private giveUp: TimerHandle | null;
  private attempt = 0;
  private stopped = false;
  private lastWhy = 'no answer';
  private finish!: () => void;
  private refuse!: (e: CellvigilError) => void;

  constructor(private readonly o: WatchClientOptions) {
    this.clock = o.clock ?? new HostClock();
    this.minMs = o.backoffMinMs ?? 500;
    this.maxMs = o.backoffMaxMs ?? 15_000;
    this.firstMs = o.firstConnectMs ?? FIRST_CONNECT_MS;
    this.done = new Promise<void>((resolve, reject) => {
      this.finish = resolve;
      this.refuse = reject;
    });
    this.giveUp = this.clock.setTimer(() => this.neverAnswered(), this.firstMs);
  }

  stop(): void {
    if (this.stopped) return;
    this.stopped = true;
    if (this.timer) this.clock.clearTimer(this.timer);
    this.connected();
    this.ws?.close(1000);
    this.finish();
  }

  connect(): void {
    this.timer = null;
    if (this.stopped) return;
    this.o.onLink('connecting');
    const sock = new WebSocket(this.o.url, {
      maxPayload: 16 * 1024 * 1024,
      perMessageDeflate: false,
    });
    this.ws = sock;
    let why = 'connection closed';
    sock.on('unexpected-response', (_req, res) => {
      const status = res.statusCode ?? 0;
      res.resume();
      sock.terminate();
      if (status === 401 || status === 403 || status === 404) {
        this.stopped = true;
        this.connected();
        this.refuse(refused(this.o.url, status));
      } else why = `HTTP ${status}`;
    });
    sock.on('error', (e: NodeJS.ErrnoException) => (why = e.code ?? e.message));
    sock.on('open', () => {
      this.connected();
      this.o.onLink('live');
    });
    sock.on('message', (data, isBinary) => this.onMessage(data.toString(), isBinary));
    sock.on('close', () => {
      if (this.ws === sock) this.ws = null;
      this.retry(why);
    });
  }

  /** An address that never answered within firstConnectMs is most likely wrong. */
  private neverAnswered(): void {
    this.giveUp = null;
    if (this.stopped) return;
    this.stopped = true;
    if (this.timer) this.clock.clearTimer(this.timer);
    this.timer = null;
    this.ws?.terminate();
    this.refuse(unreachable(this.o.url, this.lastWhy, this.firstMs));
  }

  private connected(): void {
    if (this.giveUp) this.clock.clearTimer(this.giveUp);
    this.giveUp = null;
  }

  private retry(why: string): void {
    this.lastWhy = why;
    if (this.stopped) return;
    const delay =
      Math.min(this.maxMs, this.minMs * 2 ** this.attempt) * (0.75 + Math.random() * 0.5);
    this.attempt++;
    this.o.onLink(`${why}; retrying in ${Math.ceil(delay / 1000)} s`);
    this.timer = this.clock.setTimer(() => this.connect(), delay);
  }

  private onMessage(text: string, isBinary: boolean): void {
    if (isBinary) return;
    let parsed: unknown;
    try {
      parsed = JSON.parse(text);
    } catch {
      return;
    }
    const checked = checkServerMessage(parsed);
    if (!checked.ok) {
      this.o.onLink(`ignored a message the viewer does not understand: ${checked.error}`);
      return;
    }
    if (checked.value.type === 'hello') this.attempt = 0;
    this.o.onMessage(checked.value);
  }
}
