import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync, readdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { CLI, readJson } from '../e2e/pty-helpers.js';
import { calibrateFromTruth, type TruthCalibration } from './calibrate-from-truth.js';
import {
  RIG_PROFILE,
  startEmulatedRig,
  waitUntil,
  type EmulatedRig,
  type HarnessTruth,
} from './emulated-rig.js';

interface Result {
  capacity_Ah: number;
  energy_Wh: number;
  end_reason: string;
  load_off_confirmed: boolean;
  calibration_id: string;
  cell_id: string;
  frames_lost: number;
  frames_rejected: number;
}

/**
 * A relay between the station and the emulated rig's pty that logs what passes (`socat -v`):
 * the heartbeats the rig heard, with the moment each went by. Its delay (microseconds) is far
 * below a frame's period.
 */
interface Relay {
  hostPath: string;
  child: ChildProcess;
  /** Seconds (of the day) at which a `C,BEAT` went from the station to the rig. */
  beats(): number[];
  stop(): Promise<void>;
}

async function startRelay(rig: EmulatedRig): Promise<Relay> {
  const hostPath = join(rig.dir, 'host');
  const child = spawn(
    'socat',
    ['-v', `pty,raw,echo=0,link=${hostPath}`, `file:${rig.port},raw,echo=0`],
    { stdio: ['ignore', 'ignore', 'pipe'] },
  );
  let log = '';
  child.stderr!.on('data', (d: Buffer) => (log += d.toString('latin1')));
  await waitUntil(() => existsSync(hostPath), 5000, 'the relay’s pty');
  const exited = new Promise<void>((r) => child.once('exit', () => r()));
  return {
    hostPath,
    child,
    beats: () => {
      // Each chunk: "> 2026/12/03 12:34:56.000789012  length=N from=A to=B" then its bytes;
      // ">" is the first address (the station's side) writing to the second (the rig). Some
      // socat versions print microseconds in nine digits, others nanoseconds.
      const head = /([<>]) \d{4}\/\d\d\/\d\d (\d\d):(\d\d):(\d\d)\.(\d+)\s+length=\d+.*$/gm;
      const heads = [...log.matchAll(head)];
      const micro = heads.every((m) => m[5]!.length === 9 && Number(m[5]) < 1e6);
      return heads.flatMap((m, i) => {
        const body = log.slice(m.index + m[0].length, heads[i + 1]?.index ?? log.length);
        const frac = Number(m[5]) / (micro ? 1e6 : 10 ** m[5]!.length);
        const at = Number(m[2]) * 3600 + Number(m[3]) * 60 + Number(m[4]) + frac;
        const n = m[1] === '>' ? body.split('C,BEAT').length - 1 : 0;
        return Array.from({ length: n }, () => at);
      });
    },
    stop: async () => {
      if (child.exitCode !== null || child.signalCode !== null) return;
      child.kill('SIGTERM');
      await exited;
    },
  };
}

const stationFile = (port: string, cal: TruthCalibration[]): string =>
  [
    'listen: off',
    'rigs:',
    '  ref:',
    `    port: ${port}`,
    `    profile: ${RIG_PROFILE}`,
    '    channels:',
    ...cal.map(
      (c, ch) =>
        `      ${ch}: { chemistry: li-ion, label: ch${ch}, cell_id: E-${ch}, calibration: ${c.file} }`,
    ),
    '',
  ].join('\n');

interface Outcome {
  exitCode: number | null;
  output: string;
  results: Result[];
  truth: HarnessTruth;
  beats: number[];
}

/**
 * Both channels of the emulated reference rig discharging at once under one station: one rig,
 * one port, two runs. Each channel is calibrated first on an emulated rig of its own, as the
 * one-channel discharge test does.
 */
async function dischargeBoth(): Promise<Outcome> {
  const cal = await Promise.all([calibrateFromTruth(0, 10), calibrateFromTruth(1, 11)]);
  const rig = await startEmulatedRig({ capacityMah: 20, soc: 0.9, seed: 30 });
  const relay = await startRelay(rig);
  try {
    const runs = join(rig.dir, 'runs');
    const file = join(rig.dir, 'station.yaml');
    writeFileSync(file, stationFile(relay.hostPath, cal));
    const child = spawn(process.execPath, [CLI, 'station', file, '--once', '--runs', runs], {
      stdio: ['ignore', 'pipe', 'pipe'],
    });
    let output = '';
    child.stdout!.on('data', (d: Buffer) => (output += d.toString()));
    child.stderr!.on('data', (d: Buffer) => (output += d.toString()));
    const exitCode = await new Promise<number | null>((r) => child.once('exit', (c) => r(c)));
    await new Promise((r) => setTimeout(r, 300));
    const folders = readdirSync(runs).filter((f) => !f.endsWith('.json'));
    const results = [0, 1].map((ch) => {
      const folder = folders.find((f) => f.endsWith(`-ch${ch}`));
      if (!folder) throw new Error(`no run folder of channel ${ch} in ${folders.join(', ')}`);
      return readJson<Result>(join(runs, folder, 'result.json'));
    });
    return { exitCode, output, results, truth: rig.truth(), beats: relay.beats() };
  } finally {
    await relay.stop();
    await rig.stop();
  }
}

describe('reference firmware on an emulated chip: both channels at once under one station', () => {
  let o: Outcome;

  beforeAll(async () => {
    o = await dischargeBoth();
  }, 180_000);

  for (const ch of [0, 1] as const) {
    it(`channel ${ch}: ends at its own cutoff, load off confirmed, its pin on once and off once`, () => {
      expect(o.exitCode, o.output).toBe(0);
      const r = o.results[ch]!;
      expect(r.end_reason).toBe('cutoff');
      expect(r.load_off_confirmed).toBe(true);
      expect(r.cell_id).toBe(`E-${ch}`);
      expect(o.truth.channels[ch].segments.map((s) => s.load)).toEqual([false, true, false]);
      expect(r.frames_lost + r.frames_rejected).toBe(0);
    });

    it(`channel ${ch}: capacity within 0.3 % of the harness's charge for that channel (∫ I dt by emulated time, physics)`, () => {
      const r = o.results[ch]!;
      const truthAh = o.truth.channels[ch].charge_Ah;
      expect(truthAh).toBeGreaterThan(0.015);
      expect(Math.abs(r.capacity_Ah - truthAh) / truthAh).toBeLessThan(0.003);
      const energy = o.truth.channels[ch].energy_Wh;
      expect(Math.abs(r.energy_Wh - energy) / energy).toBeLessThan(0.005);
    });
  }

  it('both loads were on together for most of the discharge (the channels really ran at once)', () => {
    const on = o.truth.channels.map((c) => c.segments.find((s) => s.load)!);
    const overlap = Math.min(on[0]!.to_ms, on[1]!.to_ms) - Math.max(on[0]!.from_ms, on[1]!.from_ms);
    const shorter = Math.min(...on.map((s) => s.to_ms - s.from_ms));
    expect(overlap / shorter).toBeGreaterThan(0.9);
  });

  it('the rig hears one heartbeat, not one per channel: beats 0.3 to 1 s apart while two channels each beat every 0.5 s (common practice: one watchdog per rig)', () => {
    const b = o.beats;
    const spanS = b.at(-1)! - b[0]!;
    expect(spanS).toBeGreaterThan(10);
    // One channel alone sends one every 0.5 s; two unshared would send about twice as many.
    expect(b.length).toBeLessThan(spanS / 0.4 + 2);
    const gaps = b.slice(1).map((t, i) => t - b[i]!);
    expect(Math.min(...gaps)).toBeGreaterThan(0.3);
    // And the beats kept coming: never a second without one (the rig's watchdog allows 5 s).
    expect(Math.max(...gaps)).toBeLessThan(1);
  });
});
