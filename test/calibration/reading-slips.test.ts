/**
 * Slips at the calibration dialogue, caught when the reading is typed rather than when the whole
 * fit is refused at the end; and the captured points kept when a fit is refused all the same.
 * Unit prefixes (1 mV = 0.001 V) and the Fahrenheit scale (°C = (°F − 32) × 5/9) are from the
 * SI Brochure (BIPM, 9th edition) and NIST SP 811, from memory.
 */
import { mkdtemp, readFile, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { runCalibrate, type CalibrateRequest } from '../../src/calibration/calibrate-run.js';
import type { Prompter } from '../../src/calibration/interactive.js';
import { parsePointsFile } from '../../src/calibration/points-file.js';
import { readingSlip } from '../../src/calibration/reading-check.js';
import { AnalogChain } from '../../src/chain/analog-chain.js';
import type { RigProfile } from '../../src/chain/rig-profile-types.js';
import { loadRigProfile } from '../../src/chain/rig-profile-file.js';
import { VirtualClock } from '../../src/core/clock.js';
import { CellvigilError, ErrorCodes } from '../../src/core/errors.js';
import { BENCH_RIG, drive, scenario, simConnection } from './sim-driver.js';

describe('readingSlip: a typed reading against the rig nominal reading', () => {
  it('takes a reading in mV for V as a slip and says what it is in V (1 mV = 0.001 V, SI)', () => {
    const m = readingSlip('voltage', 4097, 4.09, 6.6);
    expect(m).toContain('mV');
    expect(m).toContain('4.097 V');
  });
  it('takes a reading in mA for A as a slip (1 mA = 0.001 A, SI)', () => {
    expect(readingSlip('current', 1520, 1.58, 5.4)).toContain('1.52 A');
  });
  it('flags a decimal point three places off the other way', () => {
    expect(readingSlip('voltage', 0.0041, 4.1, 6.6)).toContain('decimal point');
  });
  it('accepts readings a few percent off the nominal chain, and 0 A against a small offset', () => {
    expect(readingSlip('voltage', 4.097, 4.02, 6.6)).toBeNull();
    expect(readingSlip('current', 1.52, 1.58, 5.4)).toBeNull();
    expect(readingSlip('current', 0, 0.03, 5.4)).toBeNull();
  });
  it('flags a value far from the rig with no unit explanation, and one beyond full scale', () => {
    expect(readingSlip('voltage', 12.6, 4.1, 6.6)).toContain('full scale');
    expect(readingSlip('current', 0.2, 1.5, 5.4)).toContain('far from');
  });
  it('recognises 77 °F typed for 25 °C (°C = (°F − 32) × 5/9)', () => {
    expect(readingSlip('temperature', 77, 25.3, 0)).toContain('Fahrenheit');
    expect(readingSlip('temperature', 26, 25.3, 0)).toBeNull();
  });
});

let dir: string;
let profile: RigProfile;
beforeEach(async () => {
  dir = await mkdtemp(join(tmpdir(), 'cellvigil-slips-'));
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
    seconds: 2,
    settleSeconds: 0.5,
    channel: 0,
    ...over,
  };
}

describe('the dialogue asks again at once', () => {
  it('asks again for a voltage typed in mV, keeps the right one, and retakes the last point on r', async () => {
    const clock = new VirtualClock();
    const conn = simConnection(clock, scenario('demo'), profile);
    const shown: string[] = [];
    const volts = (): string => conn.source.rig.truth().terminalV.toFixed(3);
    let loadedVolts = '';
    clock.setTimer(
      () => {
        if (conn.source.rig.truth().loadOn) loadedVolts = volts();
      },
      100,
      true,
    );
    let slipLine = -1;
    const answers: Array<string | (() => string)> = [
      'bench DMM, 20 V range',
      'y', // voltage
      '', // point 1 load off
      '', // Enter: average
      () => String(Math.round(Number(volts()) * 1000)), // typed in mV
      () => {
        slipLine = shown.length;
        return volts();
      },
      '0.05%+0.002',
      '', // next point
      'y', // point 2 load on
      '', // Enter
      () => loadedVolts,
      '0.05%+0.002',
      'r', // take point 2 again
      'y',
      '',
      () => loadedVolts,
      '0.05%+0.002',
      'n', // no more voltage points
      'n', // current
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
      runCalibrate(request(), { print: prompter.print, prompter, connection: conn }),
    );
    expect(answers).toEqual([]);
    const text = shown.join('\n');
    expect(text).toMatch(/about 1000 times what the rig reads .*typed in mV\?/);
    expect(slipLine).toBeGreaterThan(0);
    expect(text).toContain('point 2 dropped; take it again.');
    const pts = out.calibration.voltage!.points;
    expect(pts).toHaveLength(2);
    expect(pts[0]!.reference).toBeGreaterThan(3);
    expect(pts[0]!.reference).toBeLessThan(4.3);
    expect(out.calibration.voltage!.fit.gain).toBeGreaterThan(0.9);
    expect(out.calibration.voltage!.fit.gain).toBeLessThan(1.1);
  });

  it('keeps a doubtful reading typed twice (the meter may be right)', async () => {
    const clock = new VirtualClock();
    const conn = simConnection(clock, scenario('demo'), profile);
    const answers = [
      'bench DMM',
      'y',
      '',
      '',
      '12.6',
      '12.6',
      '1/2 %',
      'u=0.01',
      'r',
      '',
      '',
      '4.1',
    ];
    const shown: string[] = [];
    const prompter: Prompter = {
      print: (l) => shown.push(l),
      ask: async (q) => {
        shown.push(q);
        const a = answers.shift();
        if (a === undefined) throw new CellvigilError(ErrorCodes.CALIBRATION_CAPTURE, 'stop');
        return a;
      },
    };
    await drive(
      clock,
      runCalibrate(request(), { print: prompter.print, prompter, connection: conn }).catch(
        () => null,
      ),
    );
    const text = shown.join('\n');
    // The second 12.6 was taken: the next question is the accuracy, not the reading again.
    expect(text).toMatch(/full scale/);
    expect(text).toContain('recorded: raw mean');
    expect(text).toContain('point 1 dropped; take it again.');
    // A bad accuracy names the point it was typed for.
    expect(text).toContain(
      '"1/2 %" is not an accuracy (meter accuracy for voltage point 1 (load off))',
    );
  });
});

describe('a refused fit keeps the captured points', () => {
  it('saves them for --from-points, where the mended reading then fits', async () => {
    const clock = new VirtualClock();
    const conn = simConnection(clock, scenario('demo'), profile);
    const pointsPath = join(dir, 'plan.yaml');
    // A points file needs no dialogue, so the mV slip reaches the fit, which refuses a gain of ~1000.
    await writeFile(
      pointsPath,
      `points:
  - { quantity: voltage, load: off, reference: 4100, u: 1 }
  - { quantity: voltage, load: on, reference: truth }
`,
    );
    const lines: string[] = [];
    const e = await drive(
      clock,
      runCalibrate(request({ points: pointsPath, chemistry: 'li-ion', reference: 'DMM' }), {
        print: (l) => lines.push(l),
        connection: conn,
      }).then(
        () => null,
        (err: unknown) => err,
      ),
    );
    expect(e).toBeInstanceOf(CellvigilError);
    expect((e as CellvigilError).code).toBe(ErrorCodes.CALIBRATION_FIT);
    const saved = join(dir, 'cal.points.yaml');
    expect(lines.join('\n')).toContain(`--from-points ${saved}`);
    const text = await readFile(saved, 'utf8');
    const parsed = parsePointsFile(text, saved);
    expect(parsed.referenceInstrument).toBe('DMM');
    expect(parsed.points).toHaveLength(2);
    const [rest, loaded] = parsed.points;
    expect(rest!.reference).toBe(4100);
    expect(loaded!.reference).toBeGreaterThan(2.5);
    expect(rest!.raw!.samples).toBeGreaterThan(10);

    // Mend the reading: what the meter would have shown, in volts (the rig's nominal value
    // scaled as the loaded point's true value scales its own).
    const chain = new AnalogChain(profile);
    const scale = (loaded!.reference as number) / chain.volts(loaded!.raw!.mean);
    const volts = (chain.volts(rest!.raw!.mean) * scale).toFixed(4);
    const mended = text.replace(
      /reference: 4100\n(\s+)u: 1\n/,
      (_m, pad: string) => `reference: ${volts}\n${pad}u: 0.002\n`,
    );
    expect(mended).not.toBe(text);
    await writeFile(saved, mended);
    const out = await runCalibrate(
      {
        speed: 1,
        out: join(dir, 'cal.json'),
        seconds: 2,
        settleSeconds: 0,
        channel: 0,
        fromPoints: saved,
      },
      { print: () => undefined },
    );
    expect(out.calibration.voltage!.fit.gain).toBeGreaterThan(0.9);
    expect(out.calibration.voltage!.fit.gain).toBeLessThan(1.1);
  });
});
