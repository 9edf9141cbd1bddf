/**
 * `calibrate` end to end on the simulated rig. The simulator's true values are the external
 * reference here: its front end has a current offset (30 mA) and gain error (4 %) that the host
 * does not know (scenario demo, config/sim-scenarios.yaml), and the calibration must find them.
 */
import { mkdtemp, readdir, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { applyCalibration } from '../../src/calibration/calibration.js';
import { loadCalibration } from '../../src/calibration/calibration-file.js';
import {
  runCalibrate,
  type CalibrateIo,
  type CalibrateRequest,
} from '../../src/calibration/calibrate-run.js';
import { meanUncertaintyCounts } from '../../src/calibration/capture.js';
import type { Prompter } from '../../src/calibration/interactive.js';
import { makeLoadGuard } from '../../src/calibration/load-guard.js';
import { capturePoint } from '../../src/calibration/point-capture.js';
import { RigLink } from '../../src/calibration/rig-link.js';
import { AnalogChain } from '../../src/chain/analog-chain.js';
import type { RigProfile } from '../../src/chain/rig-profile-types.js';
import { loadRigProfile } from '../../src/chain/rig-profile-file.js';
import { findChemistry } from '../../src/chemistry/chemistries.js';
import { loadChemistries } from '../../src/chemistry/chemistry-file.js';
import { VirtualClock } from '../../src/core/clock.js';
import { CellvigilError, ErrorCodes, makeError } from '../../src/core/errors.js';
import { WATCHDOG_MS } from '../../src/sim/sim-rig.js';
import { BENCH_RIG, drive, scenario, simConnection } from './sim-driver.js';

const TRUTH_POINTS = `# simulation only: the references are the simulator's true values
points:
  - { quantity: current, load: off, reference: truth }
  - { quantity: current, load: on, reference: truth }
  - { quantity: voltage, load: off, reference: truth }
  - { quantity: voltage, load: on, reference: truth }
  - { quantity: temperature, load: off, reference: truth }
`;

let dir: string;
let profile: RigProfile;
beforeEach(async () => {
  dir = await mkdtemp(join(tmpdir(), 'cellvigil-calsim-'));
  profile = await loadRigProfile(BENCH_RIG);
});
afterEach(async () => {
  await rm(dir, { recursive: true, force: true });
});

function request(over: Partial<CalibrateRequest> = {}): CalibrateRequest {
  return {
    sim: 'demo',
    speed: 1,
    out: join(dir, 'cal.json'),
    seconds: 5,
    settleSeconds: 1,
    channel: 0,
    ...over,
  };
}

async function pointsFile(text: string): Promise<string> {
  const path = join(dir, `points-${Math.random().toString(36).slice(2)}.yaml`);
  await writeFile(path, text);
  return path;
}

async function refusal(p: Promise<unknown>): Promise<CellvigilError> {
  const e = await p.then(
    () => null,
    (err: unknown) => err,
  );
  expect(e).toBeInstanceOf(CellvigilError);
  return e as CellvigilError;
}

describe('calibrate --sim demo --points (reference: truth)', () => {
  it('finds the hidden 30 mA offset and 4 % gain error and recovers the true current at another load, within the fit uncertainty', async () => {
    const clock = new VirtualClock();
    const demo = scenario('demo');
    const conn = simConnection(clock, demo, profile);
    const lines: string[] = [];
    const out = await drive(
      clock,
      runCalibrate(request({ points: await pointsFile(TRUTH_POINTS) }), {
        print: (l) => lines.push(l),
        connection: conn,
      }),
    );

    const cal = await loadCalibration(join(dir, 'cal.json'));
    expect(cal.id).toBe(out.calibration.id);
    expect(cal.rig).toBe('simrig-a1');
    expect(cal.current!.points).toHaveLength(2);
    expect(cal.temperature!.fit.model).toBe('offset');
    // The sim's front end reads 1.04 × I + 30 mA (less half a count of ADC rounding), so the
    // correction is about I = nominal / 1.04 − 30 mA / 1.04.
    const f = cal.current!.fit;
    expect(Math.abs(f.gain - 1 / 1.04)).toBeLessThan(3 * f.u_gain);
    expect(f.offset).toBeGreaterThan(-0.03 / 1.04 - 0.001);
    expect(f.offset).toBeLessThan(-0.03 / 1.04 + 0.001);
    expect(lines.join('\n')).toContain('current: reference = 0.96');

    // An independent check: the same board, another load (6 Ω, about half the current), other noise.
    const verify = simConnection(clock, { ...demo, load: { ...demo.load, load_ohm: 6 } }, profile, {
      seed: 77,
    });
    const chain = new AnalogChain(profile);
    const chemistries = loadChemistries();
    const link = new RigLink({ source: verify.source, clock, channel: 0, adcBits: 12 });
    const w = await drive(
      clock,
      (async () => {
        await link.open();
        try {
          return await capturePoint(
            {
              link,
              chain,
              clock,
              channel: 0,
              settleMs: 1000,
              guard: makeLoadGuard(
                findChemistry(chemistries, 'li-ion'),
                1,
                chemistries,
                profile,
                chain,
              ),
              truth: verify.truth,
            },
            { loadOn: true, windowMs: 5000, label: 'verification' },
          );
        } finally {
          await link.close();
        }
      })(),
    );
    const nominal = chain.amps(w.current.mean);
    const corrected = applyCalibration(cal).current(nominal);
    const trueA = w.truth!.current;
    expect(trueA).toBeGreaterThan(0.5);
    expect(trueA).toBeLessThan(0.8);
    // GUM law of propagation (JCGM 100:2008 5.1.2) through corrected = gain·x + offset.
    const uNominal = chain.ampsPerCount * meanUncertaintyCounts(w.current);
    const u = Math.sqrt(
      (nominal * f.u_gain) ** 2 +
        f.u_offset ** 2 +
        2 * nominal * f.cov_gain_offset +
        (f.gain * uNominal) ** 2,
    );
    expect(Math.abs(corrected - trueA)).toBeLessThan(2 * u);
    // Uncalibrated, the same reading is several percent off.
    expect(Math.abs(nominal - trueA) / trueA).toBeGreaterThan(0.05);
  });

  it('switches the load on only for loaded points, off after each, and off at the end', async () => {
    const clock = new VirtualClock();
    const conn = simConnection(clock, scenario('demo'), profile);
    const twoLoaded = `points:
  - { quantity: current, load: on, reference: truth }
  - { quantity: current, load: off, reference: truth }
  - { quantity: current, load: on, reference: truth, seconds: 3 }
`;
    await drive(
      clock,
      runCalibrate(request({ points: await pointsFile(twoLoaded) }), {
        print: () => undefined,
        connection: conn,
      }),
    );
    const log = conn.source.rig.loadLog();
    expect(log.map((s) => [s.on, s.cause])).toEqual([
      [true, 'host'],
      [false, 'host'],
      [true, 'host'],
      [false, 'host'],
    ]);
    expect(conn.source.rig.truth().loadOn).toBe(false);
  });

  it('keeps the heartbeat going through a window longer than the rig watchdog (protocol v1: 5 s)', async () => {
    const clock = new VirtualClock();
    const conn = simConnection(clock, scenario('demo'), profile);
    const file = await pointsFile(`points:
  - { quantity: current, load: off, reference: truth }
  - { quantity: current, load: on, reference: truth }
`);
    await drive(
      clock,
      runCalibrate(request({ points: file, seconds: 12 }), {
        print: () => undefined,
        connection: conn,
      }),
    );
    const log = conn.source.rig.loadLog();
    expect(log.every((s) => s.cause === 'host')).toBe(true);
    // On for the settling second and the 12 s window, more than twice the watchdog's 5 s.
    expect(log[1]!.atMs - log[0]!.atMs).toBeGreaterThan(Math.max(12_000, 2 * WATCHDOG_MS));
    expect(conn.source.rig.truth().rigFault).toBe(false);
  });

  it('an interruption while the load is on switches it off and writes nothing', async () => {
    const clock = new VirtualClock();
    const conn = simConnection(clock, scenario('demo'), profile);
    const controller = new AbortController();
    const io: CalibrateIo = { print: () => undefined, connection: conn, signal: controller.signal };
    const file = await pointsFile(`points:
  - { quantity: current, load: off, reference: truth }
  - { quantity: current, load: on, reference: truth }
`);
    // Interrupt two seconds into the loaded point.
    const watcher = clock.setTimer(
      () => {
        const last = conn.source.rig.loadLog().at(-1);
        if (last?.on && clock.now() - last.atMs >= 2000) {
          clock.clearTimer(watcher);
          controller.abort(
            makeError(
              ErrorCodes.CALIBRATION_CAPTURE,
              'calibration interrupted',
              'SIGINT',
              'Nothing was written.',
            ),
          );
        }
      },
      100,
      true,
    );
    const e = await refusal(drive(clock, runCalibrate(request({ points: file, seconds: 5 }), io)));
    expect(e.code).toBe(ErrorCodes.CALIBRATION_CAPTURE);
    expect(e.message).toContain('interrupted');
    expect(conn.source.rig.loadLog().map((x) => x.on)).toEqual([true, false]);
    expect(conn.source.rig.truth().loadOn).toBe(false);
    expect(conn.source.rig.loadLog().at(-1)).toMatchObject({ on: false, cause: 'host' });
    expect(await readdir(dir)).not.toContain('cal.json');
  });

  it('refuses to switch the load on when the cell rests at or below its cutoff (li-ion 3.0 V, common practice)', async () => {
    const clock = new VirtualClock();
    const demo = scenario('demo');
    const conn = simConnection(
      clock,
      { ...demo, cell: { ...demo.cell, initial_soc: 0.01 } },
      profile,
    );
    const file = await pointsFile(`points:
  - { quantity: current, load: off, reference: truth }
  - { quantity: current, load: on, reference: truth }
`);
    const e = await refusal(
      drive(
        clock,
        runCalibrate(request({ points: file }), { print: () => undefined, connection: conn }),
      ),
    );
    expect(e.code).toBe(ErrorCodes.PRECHECK_REFUSED);
    expect(e.message).toContain('Nothing was switched on');
    expect(conn.source.rig.loadLog()).toEqual([]);
  });

  it('refuses loaded points on a real port without a chemistry, before opening anything', async () => {
    const file = await pointsFile(`points:
  - { quantity: current, load: off, reference: 0, u: 0 }
  - { quantity: current, load: on, reference: 1.2, accuracy: "0.5%+0.003" }
`);
    const e = await refusal(
      runCalibrate(
        request({ sim: undefined as never, port: '/dev/null-rig', points: file, reference: 'DMM' }),
        { print: () => undefined },
      ),
    );
    expect(e.code).toBe(ErrorCodes.USAGE);
    expect(e.message).toContain('--chemistry');
  });

  it('refuses two current points at the same condition (degenerate: same reference twice) after capturing, leaving the load off', async () => {
    const clock = new VirtualClock();
    const conn = simConnection(clock, scenario('demo'), profile);
    const file = await pointsFile(`points:
  - { quantity: current, load: off, reference: truth }
  - { quantity: current, load: off, reference: truth }
`);
    const e = await refusal(
      drive(
        clock,
        runCalibrate(request({ points: file }), { print: () => undefined, connection: conn }),
      ),
    );
    expect(e.code).toBe(ErrorCodes.CALIBRATION_FIT);
    expect(e.message).toContain('the same reference reading');
    expect(e.message).toContain('the load off (0 A) and the load on');
    expect(await readdir(dir)).not.toContain('cal.json');
  });

  it('refuses "truth" references on a real rig', async () => {
    const file = await pointsFile(TRUTH_POINTS);
    const e = await refusal(
      runCalibrate(
        request({
          sim: undefined as never,
          port: '/dev/null-rig',
          points: file,
          chemistry: 'li-ion',
        }),
        { print: () => undefined },
      ),
    );
    expect(e.code).toBe(ErrorCodes.USAGE);
    expect(e.message).toContain('simulator');
  });
});

describe('calibrate at a terminal (the dialogue, scripted)', () => {
  it('asks per quantity, shows the raw mean and spread, records typed readings with their accuracy', async () => {
    const clock = new VirtualClock();
    const conn = simConnection(clock, scenario('demo'), profile);
    const shown: string[] = [];
    // The person reads the meter while the rig averages with the load on.
    let loadedTruth = 0;
    clock.setTimer(
      () => {
        const t = conn.source.rig.truth();
        if (t.loadOn) loadedTruth = t.currentA;
      },
      100,
      true,
    );
    const answers: Array<string | (() => string)> = [
      'bench DMM, 10 A range', // instrument
      'n', // voltage
      '', // current: yes
      '', // point 1: load off (default)
      '', // press Enter
      '', // reading: 0 (default for load off)
      '', // accuracy: u=0 (nothing flows)
      '', // next point (Enter; r would take point 1 again)
      '', // point 2: load on (default for the second point)
      '', // press Enter
      () => loadedTruth.toFixed(4), // what the meter showed
      '0.5%+0.003', // its limits
      'n', // another? no
      'n', // temperature
    ];
    const prompter: Prompter = {
      print: (l) => shown.push(l),
      ask: async (q) => {
        shown.push(q);
        const a = answers.shift();
        if (a === undefined) throw new Error(`unexpected question: ${q}`);
        return typeof a === 'function' ? a() : a;
      },
    };
    const out = await drive(
      clock,
      runCalibrate(request({ sim: 'demo' }), { print: prompter.print, prompter, connection: conn }),
    );
    expect(answers).toEqual([]);
    const cal = out.calibration;
    expect(cal.reference_instrument).toBe('bench DMM, 10 A range');
    expect(cal.voltage).toBeUndefined();
    const [off, on] = cal.current!.points;
    expect(off!.reference).toBe(0);
    expect(off!.reference_u).toBe(0);
    expect(on!.reference).toBeCloseTo(loadedTruth, 4);
    expect(on!.reference).toBeGreaterThan(1);
    // ±(0.5 % of reading + 3 mA) taken as rectangular: u = a/√3 (GUM, JCGM 100:2008 4.3.7).
    expect(on!.reference_u).toBeCloseTo(
      (0.005 * Number(loadedTruth.toFixed(4)) + 0.003) / Math.sqrt(3),
      12,
    );
    const text = shown.join('\n');
    expect(text).toContain('Put the reference ammeter in series with the load');
    expect(text).toMatch(/rig: raw mean \d+\.\d\d, sd \d\.\d\d counts over \d+ frames/);
    expect(text).toContain('three or more recommended');
    expect(conn.source.rig.truth().loadOn).toBe(false);
  });
});
