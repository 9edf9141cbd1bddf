import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { WebSocket, type ClientOptions } from 'ws';
import { LiveHub } from '../../src/live/live-hub.js';
import type { LiveRunInfo, LiveSample, ServerMessage } from '../../src/live/live-types.js';
import {
  startLiveServer,
  type LiveServer,
  type LiveServerOptions,
} from '../../src/live/live-server.js';
import { loadTokens } from '../../src/live/tokens.js';

/** Demo run (our own scenario: a 2-cell Li-ion pack on a 4 Ω load). */
export const DEMO_RUN: LiveRunInfo = {
  label: 'shed-pack-b',
  run_folder: 'runs/20260301-210000-shed-pack-b',
  chemistry: 'li-ion',
  cells: 2,
  cutoff_V: 6.0,
  floor_V: 5.0,
  calibration_id: 'cal-demo-7f3a',
  started_wall: '2026-03-01T21:00:00.000Z',
  source: 'sim:demo',
  max_temperature_C: 60,
};

/**
 * A scripted discharge for feeding the hub: the voltage falls along a smooth made-up curve
 * with a knee near the end; the charge is the running sum of current × time.
 */
export function* scriptedDischarge(n: number, dtS = 1, currentA = 1.9): Generator<LiveSample> {
  let ah = 0;
  let wh = 0;
  for (let i = 0; i < n; i++) {
    const f = i / n;
    const v = 8.2 - 1.2 * f - 0.9 * f ** 8;
    if (i > 0) {
      ah += (currentA * dtS) / 3600;
      wh += (currentA * v * dtS) / 3600;
    }
    yield {
      host_s: i * dtS,
      voltage_V: v,
      current_A: currentA,
      temperature_C: 24 + 6 * f,
      charge_Ah: ah,
      energy_Wh: wh,
      state: 'discharging',
      load_on: true,
    };
  }
}

export function tempHome(): string {
  return mkdtempSync(join(tmpdir(), 'cellvigil-live-'));
}

export interface Rig {
  hub: LiveHub;
  server: LiveServer;
  tokens: { control: string; viewer: string };
  /** Control requests the daemon side accepted, in order. */
  accepted: Array<{ type: string }>;
}

/** A hub with a run set and a daemon-like control handler, served on a free loopback port. */
export async function startRig(
  extra: Partial<LiveServerOptions> = {},
  hub = new LiveHub({ historyPoints: 200 }),
): Promise<Rig> {
  const { tokens } = loadTokens(tempHome());
  const accepted: Array<{ type: string }> = [];
  hub.setRun(DEMO_RUN);
  hub.onControl((c) => {
    accepted.push(c);
    if (c.type === 'set-cutoff') hub.cutoffChanged(c.cutoff_V);
    return { ok: true };
  });
  const server = await startLiveServer({
    hub,
    listen: '127.0.0.1:0',
    tokenStore: tokens,
    ...extra,
  });
  return { hub, server, tokens, accepted };
}

/** A ws client that records every message and can wait for one. */
export class Viewer {
  readonly messages: ServerMessage[] = [];
  readonly ws: WebSocket;
  private waiters: Array<() => void> = [];
  closed: { code: number; reason: string } | null = null;
  samplesSeen = 0;
  lastSample: Extract<ServerMessage, { type: 'sample' }> | null = null;

  /** With `retainSamples` false only the newest sample is kept (for long, fast streams). */
  constructor(
    url: string,
    opts: ClientOptions = {},
    private readonly retainSamples = true,
  ) {
    this.ws = new WebSocket(url, opts);
    this.ws.on('message', (d) => {
      const m = JSON.parse(d.toString()) as ServerMessage;
      if (m.type === 'sample') {
        this.samplesSeen++;
        this.lastSample = m;
      }
      if (m.type !== 'sample' || this.retainSamples) this.messages.push(m);
      this.wake();
    });
    this.ws.on('close', (code, reason) => {
      this.closed = { code, reason: reason.toString() };
      this.wake();
    });
    this.ws.on('error', () => this.wake());
  }

  private wake(): void {
    const w = this.waiters;
    this.waiters = [];
    w.forEach((f) => f());
  }

  opened(): Promise<void> {
    return new Promise((resolve, reject) => {
      if (this.ws.readyState === WebSocket.OPEN) return resolve();
      this.ws.once('open', () => resolve());
      this.ws.once('error', reject);
      this.ws.once('unexpected-response', (_req, res) =>
        reject(new Error(`HTTP ${res.statusCode}`)),
      );
    });
  }

  of<T extends ServerMessage['type']>(type: T): Array<Extract<ServerMessage, { type: T }>> {
    return this.messages.filter((m): m is Extract<ServerMessage, { type: T }> => m.type === type);
  }

  /** Resolves once `pred` holds over the received messages; fails after `ms`. */
  async until(pred: (v: Viewer) => boolean, ms = 5000): Promise<void> {
    const end = Date.now() + ms;
    while (!pred(this)) {
      if (Date.now() > end)
        throw new Error(
          `condition not met in ${ms} ms; got ${this.messages.map((m) => m.type).join(',')}`,
        );
      await new Promise<void>((r) => {
        this.waiters.push(r);
        setTimeout(r, 50);
      });
    }
  }

  send(x: unknown): void {
    this.ws.send(typeof x === 'string' ? x : JSON.stringify(x));
  }

  close(): void {
    this.ws.terminate();
  }
}

export function wsUrl(server: LiveServer, query = ''): string {
  return `${server.url.replace(/^http/, 'ws')}live${query}`;
}

/** Feeds samples as a rig does, one per event-loop turn with a gap (the server sends at most one sample per 10 ms). */
export async function paced(
  hub: LiveHub,
  samples: Iterable<LiveSample>,
  gapMs = 15,
): Promise<void> {
  for (const s of samples) {
    hub.sample(s);
    await new Promise((r) => setTimeout(r, gapMs));
  }
}
