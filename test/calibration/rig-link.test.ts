/** The calibration's rig link against a scripted rig that can misbehave (protocol v1, docs/protocol.md). */
import { describe, expect, it } from 'vitest';
import { RigLink } from '../../src/calibration/rig-link.js';
import { VirtualClock } from '../../src/core/clock.js';
import { CellvigilError, ErrorCodes } from '../../src/core/errors.js';
import { decodeHostLine, frameLine } from '../../src/protocol/codec.js';
import type { Source, SourceHandlers } from '../../src/sources/source.js';
import { drive } from './sim-driver.js';

interface Behaviour {
  adcBits?: number;
  silent?: boolean;
  /** Whether to acknowledge the n-th LOAD 0 (1-based). */
  ackOff?: (n: number) => boolean;
}

class ScriptedRig implements Source {
  readonly kind = 'serial' as const;
  readonly description = 'scripted rig';
  readonly commands: { atMs: number; line: string }[] = [];
  closed = false;
  private handlers: SourceHandlers | null = null;
  private offs = 0;

  constructor(
    private readonly clock: VirtualClock,
    private readonly b: Behaviour = {},
  ) {}

  async open(h: SourceHandlers): Promise<void> {
    this.handlers = h;
  }

  write(line: string): boolean {
    this.commands.push({ atMs: this.clock.now(), line: line.trimEnd() });
    const cmd = decodeHostLine(line.trimEnd());
    if (this.b.silent || 'error' in cmd) return true;
    const reply = (text: string): void => {
      this.clock.setTimer(() => this.handlers?.line(frameLine(text).trimEnd()), 2);
    };
    if (cmd.command === 'HELLO') reply(`H,rig-7,fw-2,${this.b.adcBits ?? 12},1`);
    if (cmd.command === 'LOAD') {
      if (!cmd.on && !(this.b.ackOff ?? (() => true))(++this.offs)) return true;
      reply(`A,LOAD,${cmd.channel},${cmd.on ? 1 : 0}`);
    }
    return true;
  }

  async close(): Promise<void> {
    this.closed = true;
  }

  sent(prefix: string): number[] {
    return this.commands.filter((c) => c.line.startsWith(prefix)).map((c) => c.atMs);
  }
}

function link(clock: VirtualClock, rig: ScriptedRig): RigLink {
  return new RigLink({ source: rig, clock, channel: 0, adcBits: 12 });
}

async function refusal(p: Promise<unknown>): Promise<CellvigilError> {
  const e = await p.then(
    () => null,
    (err: unknown) => err,
  );
  expect(e).toBeInstanceOf(CellvigilError);
  return e as CellvigilError;
}

describe('RigLink', () => {
  it('refuses a --channel the hello does not list, before any load command (protocol v1: channels count from 0)', async () => {
    const clock = new VirtualClock();
    const rig = new ScriptedRig(clock);
    const l = new RigLink({ source: rig, clock, channel: 1, adcBits: 12 });
    const e = await refusal(drive(clock, l.open()));
    expect(e.code).toBe(ErrorCodes.USAGE);
    expect(e.message).toContain(
      'rig rig-7 reports 1 channel in its hello; channel 1 does not exist',
    );
    expect(e.message).toContain('only channel 0');
    expect(rig.sent('C,LOAD')).toEqual([]);
  });

  it('beats at least once a second while the load is on, and stops when it is off (protocol v1)', async () => {
    const clock = new VirtualClock();
    const rig = new ScriptedRig(clock);
    const l = link(clock, rig);
    await drive(
      clock,
      (async () => {
        await l.open();
        await l.setLoad(true);
        await l.sleep(3000);
        await l.setLoad(false);
        await l.sleep(3000);
        await l.close();
      })(),
    );
    const [on] = rig.sent('C,LOAD,0,1');
    const [off] = rig.sent('C,LOAD,0,0');
    const beats = rig.sent('C,BEAT');
    expect(beats.length).toBeGreaterThanOrEqual(5);
    expect(beats.every((t) => t > on! && t <= off!)).toBe(true);
    const gaps = [on!, ...beats, off!].slice(1).map((t, i) => t - [on!, ...beats][i]!);
    expect(Math.max(...gaps)).toBeLessThanOrEqual(1000);
    // close() after a confirmed off sends nothing more
    expect(rig.sent('C,LOAD,0,0')).toHaveLength(1);
    expect(rig.closed).toBe(true);
  });

  it('retries an unacknowledged off once', async () => {
    const clock = new VirtualClock();
    const rig = new ScriptedRig(clock, { ackOff: (n) => n > 1 });
    const l = link(clock, rig);
    await drive(
      clock,
      (async () => {
        await l.open();
        await l.setLoad(true);
        await l.setLoad(false);
      })(),
    );
    expect(rig.sent('C,LOAD,0,0')).toHaveLength(2);
    expect(l.loadOn).toBe(false);
  });

  it('a rig that never confirms the off: close() reports it and the heartbeat stops so the rig watchdog cuts the load', async () => {
    const clock = new VirtualClock();
    const rig = new ScriptedRig(clock, { ackOff: () => false });
    const l = link(clock, rig);
    const closed = await drive(
      clock,
      (async () => {
        await l.open();
        await l.setLoad(true);
        return l.close();
      })(),
    );
    expect(closed.offConfirmed).toBe(false);
    expect((closed.error as CellvigilError).code).toBe(ErrorCodes.LOAD_NOT_CONFIRMED);
    const lastOff = rig.sent('C,LOAD,0,0').at(-1)!;
    const beatsAfter = rig.sent('C,BEAT').filter((t) => t > lastOff);
    await drive(clock, new Promise<void>((r) => clock.setTimer(r, 10_000)));
    expect(rig.sent('C,BEAT').filter((t) => t > lastOff)).toEqual(beatsAfter);
  });

  it('a silent rig: no hello within 3 s', async () => {
    const clock = new VirtualClock();
    const e = await refusal(
      drive(clock, link(clock, new ScriptedRig(clock, { silent: true })).open()),
    );
    expect(e.code).toBe(ErrorCodes.RIG_SILENT);
    expect(e.message).toContain('frame.baud');
  });

  it('a rig whose ADC does not match the rig profile is refused', async () => {
    const clock = new VirtualClock();
    const e = await refusal(
      drive(clock, link(clock, new ScriptedRig(clock, { adcBits: 10 })).open()),
    );
    expect(e.code).toBe(ErrorCodes.CONFIG_INVALID);
    expect(e.message).toContain('10-bit ADC but the rig profile says 12 bits');
  });
});
