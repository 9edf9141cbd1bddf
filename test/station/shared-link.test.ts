import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { VirtualClock } from '../../src/core/clock.js';
import { decodeRigLine, encodeDataFrame, frameLine } from '../../src/protocol/codec.js';
import { SimSource } from '../../src/sources/sim-source.js';
import type { Source, SourceHandlers } from '../../src/sources/source.js';
import { buildMultiChannelRig, loadScenarios, pickRigScenario } from '../../src/sim/scenarios.js';
import { lineChannel, RIG_LINE } from '../../src/station/line-route.js';
import { SharedRigLink, type RigHandlers } from '../../src/station/shared-link.js';
import { BENCH_PROFILE, SCENARIO_FILE } from '../sim/helpers.js';

function recorder(): SourceHandlers & { lines: string[]; closed_: string[]; reopened_: number } {
  const r = {
    lines: [] as string[],
    closed_: [] as string[],
    reopened_: 0,
    line: (t: string) => void r.lines.push(t),
    overlong: () => undefined,
    closed: (why: string) => void r.closed_.push(why),
    reopened: () => void r.reopened_++,
  };
  return r;
}

function rigRecorder(): RigHandlers & { lines: string[] } {
  const r = {
    lines: [] as string[],
    line: (t: string) => void r.lines.push(t),
    overlong: () => undefined,
    closed: () => undefined,
    reopened: () => undefined,
  };
  return r;
}

/** A port that records what is written and lets the test speak for the rig. */
class FakePort implements Source {
  readonly kind = 'serial' as const;
  readonly description = '/dev/fake';
  written: string[] = [];
  handlers: SourceHandlers | null = null;
  closedCount = 0;
  async open(h: SourceHandlers): Promise<void> {
    this.handlers = h;
  }
  write(line: string): boolean {
    this.written.push(line);
    return true;
  }
  async close(): Promise<void> {
    this.closedCount++;
  }
}

describe('routing a rig line to its channel', () => {
  it('every data frame protocol v1 can carry goes to the channel the codec reads from it (checked against the decoder)', () => {
    fc.assert(
      fc.property(
        fc.record({
          channel: fc.integer({ min: 0, max: 15 }),
          seq: fc.integer({ min: 0, max: 65535 }),
          tickMs: fc.integer({ min: 0, max: 2 ** 32 - 1 }),
          vRaw: fc.integer({ min: 0, max: 4095 }),
          iRaw: fc.integer({ min: 0, max: 4095 }),
          tRaw: fc.integer({ min: 0, max: 4095 }),
          flags: fc.integer({ min: 0, max: 255 }),
        }),
        (f) => {
          const line = encodeDataFrame(f).trimEnd();
          const d = decodeRigLine(line, 12);
          expect(d.ok && d.message.kind === 'data' && d.message.channel).toBe(lineChannel(line));
        },
      ),
    );
  });

  it('acknowledgements go to their channel; hello, errors and noise to the rig', () => {
    expect(lineChannel(frameLine('A,LOAD,12,1').trimEnd())).toBe(12);
    expect(lineChannel(frameLine('H,rig,fw,12,4').trimEnd())).toBe(RIG_LINE);
    expect(lineChannel(frameLine('E,CHANNEL,no channel 4').trimEnd())).toBe(RIG_LINE);
    for (const junk of [
      'D,16,1,2,3,4,5,00|0000',
      'D,,1',
      'D,1',
      'D,0001,2',
      'DX',
      '',
      'A,LOAD,x,1',
    ])
      expect(lineChannel(junk)).toBe(RIG_LINE);
  });
});

describe('a rig link shared by its channels', () => {
  it('each channel sees its own frames and acknowledgements, every channel the hello', async () => {
    const clock = new VirtualClock();
    const set = loadScenarios(SCENARIO_FILE);
    const rig = buildMultiChannelRig(pickRigScenario(set, 'quad-a'), clock, BENCH_PROFILE);
    const rigSide = rigRecorder();
    const link = new SharedRigLink(new SimSource({ rig, clock, description: 'quad-a' }), rigSide);
    const ch1 = recorder();
    const ch3 = recorder();
    await link.channel(1).open(ch1);
    await link.channel(3).open(ch3);
    clock.advance(1000);
    link.channel(3).write(frameLine('C,LOAD,3,1'));
    link.channel(1).write(frameLine('C,HELLO'));
    clock.advance(50);
    const frames = (r: typeof ch1) =>
      r.lines.flatMap((l) => {
        const d = decodeRigLine(l, 12);
        return d.ok && d.message.kind === 'data' ? [d.message.channel] : [];
      });
    expect(new Set(frames(ch1))).toEqual(new Set([1]));
    expect(new Set(frames(ch3))).toEqual(new Set([3]));
    // The rig's clock runs 5 % fast: a frame every 100 / 1.05 ms of host time, 11 in 1.05 s.
    expect(frames(ch1).length).toBe(11);
    for (const r of [ch1, ch3]) expect(r.lines.filter((l) => l.startsWith('H,'))).toHaveLength(1);
    expect(rigSide.lines.filter((l) => l.startsWith('H,'))).toHaveLength(2);
    expect(ch3.lines.some((l) => l.startsWith('A,LOAD,3,1'))).toBe(true);
    expect(ch1.lines.some((l) => l.startsWith('A,'))).toBe(false);
    expect(rig.truth(3).loadOn && !rig.truth(1).loadOn).toBe(true);
  });

  it('the rig hears one heartbeat however many channels send one; LOAD commands all pass', async () => {
    const port = new FakePort();
    let t = 0;
    const link = new SharedRigLink(port, rigRecorder(), { now: () => t });
    const views = [0, 1, 2, 3].map((ch) => link.channel(ch));
    for (const [ch, v] of views.entries()) {
      await v.open(recorder());
      v.write(frameLine(`C,LOAD,${ch},1`));
    }
    const beat = frameLine('C,BEAT');
    for (t = 0; t < 3000; t += 500) for (const v of views) expect(v.write(beat)).toBe(true);
    expect(port.written.filter((l) => l === beat)).toHaveLength(6);
    expect(port.written.filter((l) => l.startsWith('C,LOAD'))).toHaveLength(4);
  });

  it('a link lost reaches every channel; a channel that ends closes only its view', async () => {
    const port = new FakePort();
    const link = new SharedRigLink(port, rigRecorder());
    const a = recorder();
    const b = recorder();
    const va = link.channel(0);
    await va.open(a);
    await link.channel(1).open(b);
    port.handlers!.closed('port closed');
    port.handlers!.reopened?.();
    expect([a.closed_, b.closed_]).toEqual([['port closed'], ['port closed']]);
    expect([a.reopened_, b.reopened_]).toEqual([1, 1]);
    await va.close();
    expect(port.closedCount).toBe(0);
    port.handlers!.line(
      encodeDataFrame({
        channel: 0,
        seq: 1,
        tickMs: 1,
        vRaw: 1,
        iRaw: 1,
        tRaw: 1,
        flags: 0,
      }).trimEnd(),
    );
    expect(a.lines).toHaveLength(0);
    // The next run on the channel opens it again.
    await link.channel(0).open(a);
    await link.close();
    expect(port.closedCount).toBe(1);
  });
});
