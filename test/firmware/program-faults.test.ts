import { execFile } from 'node:child_process';
import { existsSync } from 'node:fs';
import { join } from 'node:path';
import { promisify } from 'node:util';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { SegmentLine } from '../../src/record/segments.js';
import { readSegments } from '../../src/record/segments.js';
import {
  CC_RIG_PROFILE,
  programFixture,
  startCcHarness,
  type CcHarness,
  type CcTruth,
} from './cc-rig.js';
import { daemonOnRig, finishedRun, type FinishedRun } from './daemon-on-rig.js';
import { CLI, onlyRunFolder, readJson } from '../e2e/pty-helpers.js';
import { waitUntil } from './emulated-rig.js';

interface Result {
  end_reason: string;
  end_detail: string;
}

interface Recomputed extends Result {
  segments: { kind: string; end_reason: string; charge_Ah: number }[];
  cycles: unknown[];
}

// Charges that go wrong, end to end: `cellvigil run --program` on the CC variant of the reference
// firmware on the emulated chip in real time, one small cell (1 mAh) on channel 1, three runs in
// turn. Li-ion charge window 0–45 °C (common practice); the protocol's heartbeat timeout of 5 s
// (docs/protocol.md).
const CHANNEL = 1;
const CHARGE_MAX_C = 45;
const BEAT_TIMEOUT_MS = 5000;
/** The short timeout program's 0.0042 h. */
const TIMEOUT_MS = 0.0042 * 3.6e6;
/** A soft short of 200 Ω across a 4.2 V cell draws 21 mA (Ohm's law). */
const LEAK_OHM = 200;
/** The host's termination current: 0.05 C of the program's 100 mAh (common practice). */
const HOST_TERMINATION_A = 0.005;

type Run = FinishedRun<Result, CcTruth> & { segments: SegmentLine[] };

describe('reference firmware (CC variant) on an emulated chip: a program’s charge that goes wrong', () => {
  let rig: CcHarness;
  let hot: Run;
  let afterKill: CcTruth;
  let killedFolder = '';
  let killedExit: number | null = 0;
  let killedHadResult = true;
  let chargedBeforeKill = 0;
  let recomputed: Recomputed;
  let timeout: Run;
  const ch = (t: CcTruth) => t.channels[CHANNEL];

  const program = async (
    name: string,
    file: string,
    during?: () => Promise<void>,
  ): Promise<Run> => {
    const on = daemonOnRig(rig, ['--channel', String(CHANNEL), '--program', programFixture(file)], {
      profile: CC_RIG_PROFILE,
      runsName: name,
    });
    const d = on.start();
    if (during) await during();
    const run = await finishedRun<Result, CcTruth>(rig, on, d);
    return { ...run, segments: await readSegments(run.folder) };
  };
  const chargerOn = (): Promise<void> =>
    waitUntil(() => ch(rig.truth()).charger_on, 15_000, 'the charger to go on');

  beforeAll(async () => {
    rig = await startCcHarness({
      capacityMah: 1,
      soc: 0.8,
      thermalTauS: 3,
      hotMarkC: CHARGE_MAX_C,
      seed: 31,
    });
    // 1. The air around the cell turns hot (a closed box in the sun) while it charges.
    hot = await program('hot', 'small-cell-cycle.yaml', async () => {
      await chargerOn();
      rig.control('ambient 60');
    });
    rig.control('ambient 25');
    await waitUntil(() => ch(rig.truth()).temperature_C < 30, 20_000, 'the cell to cool');

    // 2. A cell with a soft internal short: the charger can never bring its current down.
    rig.control(`leak ${CHANNEL} ${LEAK_OHM}`);
    timeout = await program('timeout', 'short-charge-timeout.yaml');
    // 3. The daemon is killed without warning in the middle of a charge (the short still on, so
    // the charger is still pushing current). Last: the rig's frames then carry flag bit 1 (it cut
    // its outputs itself) until a host switches something on again.
    const on = daemonOnRig(
      rig,
      ['--channel', String(CHANNEL), '--program', programFixture('small-cell-cycle.yaml')],
      { profile: CC_RIG_PROFILE, runsName: 'killed' },
    );
    chargedBeforeKill = ch(rig.truth()).charged_Ah;
    const d = on.start();
    await chargerOn();
    await new Promise((r) => setTimeout(r, 1500));
    d.child.kill('SIGKILL');
    killedExit = await d.exit;
    await waitUntil(() => !ch(rig.truth()).charger_on, 8000, 'the firmware to cut the charger');
    await new Promise((r) => setTimeout(r, 300));
    afterKill = rig.truth();
    killedFolder = onlyRunFolder(on.runs);
    killedHadResult = existsSync(join(killedFolder, 'result.json'));
    // The documented way on: `report` recomputes the folder from the rows it has.
    await promisify(execFile)(process.execPath, [CLI, 'report', killedFolder]);
    recomputed = readJson<Recomputed>(join(killedFolder, 'result.json'));
  }, 150_000);

  afterAll(async () => {
    await rig?.stop();
  });

  it('over-temperature during a charge: the charge ends on it (exit 3) and the charger is off within 1.5 s of the cell passing 45 °C', () => {
    expect(hot.exitCode, hot.output).toBe(3);
    expect(hot.result.end_reason).toBe('over_temperature');
    expect(hot.segments.map((s) => [s.kind, s.end_reason])).toEqual([
      ['charge', 'over_temperature'],
    ]);
    const t = ch(hot.truth);
    expect(t.hot_at_ms).toBeGreaterThan(0);
    const charge = t.segments.findLast((s) => s.mode === 'charge')!;
    const off = t.segments[t.segments.indexOf(charge) + 1]!;
    expect(off.mode).toBe('rest');
    // A frame every 100 ms and the MODE R with its acknowledgement: well under 1.5 s. The
    // thermistor is not calibrated: it reads within a couple of kelvin (from memory), up to
    // 0.5 s early while the cell warms by about 5 K/s.
    expect(off.from_ms - t.hot_at_ms).toBeGreaterThan(-500);
    expect(off.from_ms - t.hot_at_ms).toBeLessThan(1500);
    expect(t.both_on_ms).toBe(0);
  });

  it('the daemon killed mid-charge: the firmware cuts the charger 5 s after the last heartbeat (protocol heartbeat)', () => {
    expect(killedExit).toBeNull();
    const t = ch(afterKill);
    expect(t.charger_on).toBe(false);
    const segs = t.segments;
    const last = segs[segs.length - 1]!;
    expect(segs[segs.length - 2]!.mode).toBe('charge');
    expect(last.mode).toBe('rest');
    // A heartbeat that arrives while the firmware takes a frame's conversions waits for them.
    const silentFor = last.from_ms - afterKill.link.last_host_byte_ms;
    expect(silentFor).toBeGreaterThan(BEAT_TIMEOUT_MS);
    expect(silentFor).toBeLessThan(BEAT_TIMEOUT_MS + 10);
    expect(t.both_on_ms).toBe(0);
  });

  it('the killed run’s folder: no result until `report`, which records the charge as interrupted, short of what went in', () => {
    expect(killedHadResult).toBe(false);
    expect(recomputed.end_reason).toBe('interrupted');
    expect(recomputed.segments.map((s) => [s.kind, s.end_reason])).toEqual([
      ['charge', 'interrupted'],
    ]);
    expect(recomputed.cycles).toEqual([]);
    // The rows stop at the kill; the charger went on for 5 s more, unlogged.
    const truthAh = ch(afterKill).charged_Ah - chargedBeforeKill;
    expect(recomputed.segments[0]!.charge_Ah).toBeGreaterThan(0);
    expect(recomputed.segments[0]!.charge_Ah).toBeLessThan(truthAh);
  });

  it('a charge that never terminates ends on its timeout (exit 3), the charger off', () => {
    expect(timeout.exitCode, timeout.output).toBe(3);
    expect(timeout.result.end_reason).toBe('charge_timeout');
    expect(timeout.segments.map((s) => [s.kind, s.end_reason])).toEqual([
      ['charge', 'charge_timeout'],
    ]);
    const seg = timeout.segments[0]!;
    // On the host's clock, at the first frame (every 100 ms) past the timeout.
    expect(seg.ended_ms - seg.started_ms).toBeGreaterThanOrEqual(TIMEOUT_MS);
    expect(seg.ended_ms - seg.started_ms).toBeLessThan(TIMEOUT_MS + 300);
    const t = ch(timeout.truth);
    expect(t.leak_ohm).toBe(LEAK_OHM);
    expect(t.leaked_Ah).toBeGreaterThan(0);
    // The charger reached its constant voltage and its current stayed above the host's
    // termination current until the end: the short drew it.
    const charge = t.segments.filter((s) => s.mode === 'charge');
    const cv = charge[charge.length - 1]!;
    expect(cv.phase).toBe('cv');
    expect(-cv.mean_A).toBeGreaterThan(HOST_TERMINATION_A * 2);
    expect(t.charger_on).toBe(false);
    expect(t.both_on_ms).toBe(0);
  });
});
