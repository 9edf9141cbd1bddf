import { WebSocket } from 'ws';
import { ErrorCodes, makeError } from '../core/errors.js';
import {
  LIVE_VERSION,
  type ControlReply,
  type HelloMessage,
  type ServerMessage,
  type StationControlRequest,
} from './live-types.js';
import { checkServerMessage } from './message-schemas.js';

export interface ControlCall {
  /** ws:// address of /live, with the viewer token if one is needed. */
  url: string;
  channel: string;
  token: string;
  /** The request; given the channel's hello, so a cutoff per cell can become the string's volts. */
  request: (hello: HelloMessage) => StationControlRequest;
  /** @default 10000 */
  timeoutMs?: number;
}

/**
 * One control request to one channel of a running daemon, from the command line: connects to
 * that channel's stream, waits for its hello, sends the request and returns the daemon's answer.
 */
export function sendControl(c: ControlCall): Promise<ControlReply> {
  const u = new URL(c.url);
  u.searchParams.set('channel', c.channel);
  return new Promise((resolve, reject) => {
    const ws = new WebSocket(u.toString(), { perMessageDeflate: false });
    const id = `cli-${process.pid}`;
    const timer = setTimeout(() => {
      ws.terminate();
      reject(
        makeError(
          ErrorCodes.WATCH_REFUSED,
          `no answer from the daemon within ${(c.timeoutMs ?? 10_000) / 1000} s`,
          c.url.replace(/token=[^&]*/, 'token=…'),
          'Check that the station is running and the address is the one it printed.',
        ),
      );
    }, c.timeoutMs ?? 10_000);
    const finish = (r: ControlReply): void => {
      clearTimeout(timer);
      ws.close(1000);
      resolve(r);
    };
    ws.on('unexpected-response', (_req, res) => {
      clearTimeout(timer);
      res.resume();
      ws.terminate();
      reject(
        makeError(
          ErrorCodes.WATCH_REFUSED,
          `the daemon refused the connection (HTTP ${res.statusCode ?? 0}${res.statusCode === 404 ? ': no such channel' : ''})`,
          `channel ${c.channel}`,
          'Name a channel as <rig>/<n>, as the station file and `watch` show it; give the viewer token when the feed listens beyond loopback.',
        ),
      );
    });
    ws.on('error', (e) => {
      clearTimeout(timer);
      reject(
        makeError(
          ErrorCodes.WATCH_REFUSED,
          `cannot reach the daemon: ${e.message}`,
          c.url.replace(/token=[^&]*/, 'token=…'),
          'Check the address (--url) and that the station is running.',
        ),
      );
    });
    ws.on('message', (data) => {
      let m: ServerMessage;
      try {
        const checked = checkServerMessage(JSON.parse(data.toString()));
        if (!checked.ok) return;
        m = checked.value;
      } catch {
        return;
      }
      if (m.type === 'hello') {
        let request: StationControlRequest;
        try {
          request = c.request(m);
        } catch (e) {
          clearTimeout(timer);
          ws.close(1000);
          reject(e as Error);
          return;
        }
        ws.send(
          JSON.stringify({ ...request, v: LIVE_VERSION, token: c.token, id, channel: c.channel }),
        );
      } else if ((m.type === 'ack' || m.type === 'error') && m.id === id) {
        finish(m.type === 'ack' ? { ok: true } : { ok: false, error: m.error });
      }
    });
  });
}
