import type { Socket } from 'node:net';
import { afterEach, describe, expect, it } from 'vitest';
import { ViewerQueue } from '../../src/live/viewer-queue.js';
import type { LiveSample } from '../../src/live/live-types.js';
import { startRig, Viewer, wsUrl, type Rig } from './helpers.js';

describe('viewer queue', () => {
  it('passes everything through while the viewer keeps up', () => {
    const q = new ViewerQueue();
    const out: string[] = [];
    for (const [d, s] of [
      ['s1', true],
      ['st', false],
      ['s2', true],
    ] as const) {
      q.offer(d, s);
      for (let step = q.next(0, 0); step && 'send' in step; step = q.next(0, 0))
        out.push(step.send);
    }
    expect(out).toEqual(['s1', 'st', 's2']);
    expect(q.coalesced).toBe(0);
  });

  it('behind: keeps only the newest sample, keeps every other message in order, and sends them when the socket drains', () => {
    const q = new ViewerQueue({ lowWaterBytes: 100 });
    for (let i = 0; i < 1000; i++) q.offer(`s${i}`, true);
    q.offer('alarm', false);
    for (let i = 1000; i < 2000; i++) q.offer(`s${i}`, true);
    expect(q.next(500, 0)).toBeNull();
    expect(q.length).toBe(3);
    expect(q.coalesced).toBe(1998);
    const out: string[] = [];
    for (let step = q.next(0, 10); step && 'send' in step; step = q.next(0, 10))
      out.push(step.send);
    expect(out).toEqual(['s999', 'alarm', 's1999']);
  });

  it('cuts off a viewer behind for longer than stallMs, or past the buffer or queue bounds', () => {
    const q = new ViewerQueue({ lowWaterBytes: 100, stallMs: 1000 });
    q.offer('x', true);
    expect(q.next(200, 0)).toBeNull();
    expect(q.next(200, 999)).toBeNull();
    expect(q.next(200, 1001)).toMatchObject({ disconnect: expect.stringContaining('not reading') });
    expect(new ViewerQueue({ maxBufferedBytes: 10 }).next(11, 0)).toMatchObject({
      disconnect: expect.any(String),
    });
    const full = new ViewerQueue({ lowWaterBytes: 0, maxQueuedBytes: 1000 });
    for (let i = 0; i < 200; i++) full.offer('state-change', false);
    expect(full.next(1, 0)).toMatchObject({
      disconnect: expect.stringContaining('messages waiting'),
    });
  });

  it('catching up in time clears the stall clock', () => {
    const q = new ViewerQueue({ lowWaterBytes: 100, stallMs: 1000 });
    q.offer('a', true);
    expect(q.next(200, 0)).toBeNull();
    expect(q.next(50, 900)).toEqual({ send: 'a' });
    q.offer('b', true);
    expect(q.next(200, 1500)).toBeNull();
    expect(q.next(200, 2400)).toBeNull();
  });
});

let rig: Rig | null = null;
afterEach(async () => {
  await rig?.server.close();
  rig = null;
});

describe('a stalled viewer while samples flow fast', () => {
  it('is held to a bounded queue, then cut off; the log subscriber and the other viewers get on with it', async () => {
    const events: Array<[string, Record<string, unknown>]> = [];
    const LOW = 64 * 1024;
    const MAX = 1024 * 1024;
    rig = await startRig({
      queue: { lowWaterBytes: LOW, maxBufferedBytes: MAX, stallMs: 1500 },
      sweepMs: 50,
      log: ({ event, ...detail }) => events.push([event, detail]),
    });
    let logged = 0;
    rig.hub.subscribe((m) => {
      if (m.type === 'sample') logged++;
    });
    const healthy = [0, 1, 2].map(() => new Viewer(wsUrl(rig!.server), {}, false));
    const stalled = new Viewer(wsUrl(rig.server), {}, false);
    await Promise.all([...healthy, stalled].map((v) => v.until((x) => x.of('hello').length === 1)));
    // Stop reading: the kernel buffers fill, then the server's socket buffer.
    (stalled.ws as unknown as { _socket: Socket })._socket.pause();

    const heapBefore = process.memoryUsage().heapUsed;
    let maxBuffered = 0;
    let maxQueued = 0;
    let maxQueuedBytes = 0;
    let sent = 0;
    let bytesOffered = 0;
    const padding = 'p'.repeat(600); // a long state name makes each sample ~900 bytes
    const started = Date.now();
    let stalledGone = false;
    let droppedAfterMs = -1;
    // Runs by volume, not by time: until the stalled viewer is gone and 100 MB went past it.
    while (Date.now() - started < 100_000) {
      for (let i = 0; i < 400; i++) {
        const s: LiveSample = {
          host_s: sent,
          voltage_V: 4 - sent * 1e-6,
          current_A: 2,
          temperature_C: 25,
          charge_Ah: sent / 3600,
          energy_Wh: sent / 1000,
          state: `discharging-${padding}`,
          load_on: true,
        };
        rig.hub.sample(s);
        sent++;
        bytesOffered += 900;
      }
      const stats = rig.server.viewers();
      for (const v of stats) {
        maxBuffered = Math.max(maxBuffered, v.bufferedAmount);
        maxQueued = Math.max(maxQueued, v.queued);
        maxQueuedBytes = Math.max(maxQueuedBytes, v.queuedBytes);
      }
      if (!stalledGone && stats.length === 3) droppedAfterMs = Date.now() - started;
      stalledGone = stats.length === 3;
      if (stalledGone && bytesOffered > 100e6) break;
      await new Promise((r) => setImmediate(r));
    }
    const heapAfter = process.memoryUsage().heapUsed;
    // A final marker sample: every healthy viewer must get it.
    rig.hub.sample({
      host_s: 1e9,
      voltage_V: 3,
      current_A: 0,
      temperature_C: 25,
      charge_Ah: 0,
      energy_Wh: 0,
      state: 'ended',
      load_on: false,
    });
    await Promise.all(healthy.map((v) => v.until((x) => x.lastSample?.host_s === 1e9, 10_000)));

    console.log(
      `stalled-viewer run: ${sent} samples (${(bytesOffered / 1e6).toFixed(0)} MB offered per viewer) in ${Date.now() - started} ms; stalled viewer cut off after ${droppedAfterMs} ms; ` +
        `max bufferedAmount ${maxBuffered} B, max queued ${maxQueued} msgs / ${maxQueuedBytes} B; heap delta ${((heapAfter - heapBefore) / 1e6).toFixed(1)} MB; ` +
        `healthy viewers got ${healthy.map((v) => v.samplesSeen).join('/')} samples`,
    );
    expect(stalledGone).toBe(true);
    expect(events.some(([n, d]) => n === 'live_viewer_dropped' && typeof d.why === 'string')).toBe(
      true,
    );
    // Bounded: never past the cut-off bound, and at most one coalesced sample plus nothing else waiting.
    expect(maxBuffered).toBeLessThanOrEqual(MAX);
    expect(maxQueued).toBeLessThanOrEqual(1);
    expect(maxQueuedBytes).toBeLessThan(2000);
    // Far more went by than the heap grew: the stalled viewer's share was dropped, not kept.
    expect(bytesOffered).toBeGreaterThan(100e6);
    expect(heapAfter - heapBefore).toBeLessThan(40e6);
    // The log (a plain hub subscriber) saw every sample; the healthy viewers stayed and kept receiving.
    expect(logged).toBe(sent + 1);
    for (const v of healthy) {
      expect(v.closed).toBeNull();
      expect(v.samplesSeen).toBeGreaterThan(100);
    }
    healthy.forEach((v) => v.close());
    stalled.close();
  }, 150_000);
});
