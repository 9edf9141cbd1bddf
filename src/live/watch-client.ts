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
  const clock = o.clock ?? new HostClock();
  const minMs = o.backoffMinMs ?? 500;
  const maxMs = o.backoffMaxMs ?? 15_000;
  let ws: WebSocket | null = null;
  let timer: TimerHandle | null = null;
  let attempt = 0;
  let stopped = false;
  let finish!: () => void;
  let refuse!: (e: CellvigilError) => void;
  const done = new Promise<void>((resolve, reject) => {
    finish = resolve;
    refuse = reject;
  });
  let lastWhy = 'no answer';
  const firstMs = o.firstConnectMs ?? FIRST_CONNECT_MS;
  let giveUp: TimerHandle | null = clock.setTimer(() => {
    giveUp = null;
    if (stopped) return;
    stopped = true;
    if (timer) clock.clearTimer(timer);
    timer = null;
    ws?.terminate();
    refuse(unreachable(o.url, lastWhy, firstMs));
  }, firstMs);
  const connected = (): void => {
    if (giveUp) clock.clearTimer(giveUp);
    giveUp = null;
  };

  function retry(why: string): void {
    lastWhy = why;
    if (stopped) return;
    const delay = Math.min(maxMs, minMs * 2 ** attempt) * (0.75 + Math.random() * 0.5);
    attempt++;
    o.onLink(`${why}; retrying in ${Math.ceil(delay / 1000)} s`);
    timer = clock.setTimer(connect, delay);
  }

  function connect(): void {
    timer = null;
    if (stopped) return;
    o.onLink('connecting');
    const sock = new WebSocket(o.url, { maxPayload: 16 * 1024 * 1024, perMessageDeflate: false });
    ws = sock;
    let why = 'connection closed';
    sock.on('unexpected-response', (_req, res) => {
      const status = res.statusCode ?? 0;
      res.resume();
      sock.terminate();
      if (status === 401 || status === 403 || status === 404) {
        stopped = true;
        connected();
        refuse(
          makeError(
            ErrorCodes.WATCH_REFUSED,
            `the daemon refused this viewer (HTTP ${status}${status === 401 ? ': viewer token missing or wrong' : status === 404 ? ': no live feed at this address' : ''})`,
            o.url.replace(/token=[^&]*/, 'token=…'),
            status === 401
              ? 'Pass the viewer token with --token (see docs/live-feed.md).'
              : 'Check the address the daemon printed.',
          ),
        );
      } else why = `HTTP ${status}`;
    });
    sock.on('error', (e: NodeJS.ErrnoException) => (why = e.code ?? e.message));
    sock.on('open', () => {
      connected();
      o.onLink('live');
    });
    sock.on('message', (data, isBinary) => {
      if (isBinary) return;
      let parsed: unknown;
      try {
        parsed = JSON.parse(data.toString());
      } catch {
        return;
      }
      const checked = checkServerMessage(parsed);
      if (!checked.ok) {
        o.onLink(`ignored a message the viewer does not understand: ${checked.error}`);
        return;
      }
      if (checked.value.type === 'hello') attempt = 0;
      o.onMessage(checked.value);
    });
    sock.on('close', () => {
      if (ws === sock) ws = null;
      retry(why);
    });
  }

  connect();
  return {
    stop() {
      if (stopped) return;
      stopped = true;
      if (timer) clock.clearTimer(timer);
      connected();
      ws?.close(1000);
      finish();
    },
    done,
  };
}
