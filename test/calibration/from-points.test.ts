/** `calibrate --from-points`: fitting points captured before, and the checks on every fit. */
import { mkdtemp, readdir, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { applyCalibration } from '../../src/calibration/calibration.js';
import { loadCalibration } from '../../src/calibration/calibration-file.js';
import { runCalibrate, type CalibrateRequest } from '../../src/calibration/calibrate-run.js';
import { fitCheckedQuantity } from '../../src/calibration/quantity-fit.js';
import { AnalogChain } from '../../src/chain/analog-chain.js';
import { loadRigProfile } from '../../src/chain/rig-profile-file.js';
import { CellvigilError, ErrorCodes } from '../../src/core/errors.js';
import { BENCH_RIG } from './sim-driver.js';

let dir: string;
let chain: AnalogChain;
beforeEach(async () => {
  dir = await mkdtemp(join(tmpdir(), 'cellvigil-frompts-'));
  chain = new AnalogChain(await loadRigProfile(BENCH_RIG));
});
afterEach(async () => {
  await rm(dir, { recursive: true, force: true });
});

async function fromPoints(
  points: unknown[],
  over: Partial<CalibrateRequest> = {},
): Promise<{ lines: string[]; out: string }> {
  const file = join(dir, 'points.json');
  await writeFile(file, JSON.stringify({ reference_instrument: 'bench DMM, 10 A range', points }));
  const out = join(dir, 'cal.json');
  const lines: string[] = [];
  await runCalibrate(
    {
      speed: 1,
      out,
      seconds: 5,
      settleSeconds: 1,
      channel: 0,
      fromPoints: file,
      rig: BENCH_RIG,
      ...over,
    },
    { print: (l) => lines.push(l) },
  );
  return { lines, out };
}

async function refusal(p: Promise<unknown>): Promise<CellvigilError> {
  const e = await p.then(
    () => null,
    (err: unknown) => err,
  );
  expect(e).toBeInstanceOf(CellvigilError);
  return e as CellvigilError;
}

/** A current channel that shows 33 mA + 1.057 × the true current (fact of the trade). */
const shown = (trueA: number): number => 0.033 + 1.057 * trueA;

describe('calibrate --from-points', () => {
  it('recovers a channel showing 33 mA + 1.057 × true current exactly from two reference points (fact of the trade)', async () => {
    const points = [0, 2].map((a) => ({
      quantity: 'current',
      reference: a,
      u: 0,
      raw_mean: chain.countsForAmps(shown(a)),
    }));
    const { lines, out } = await fromPoints(points);
    const cal = await loadCalibration(out);
    expect(cal.current!.fit.gain).toBeCloseTo(1 / 1.057, 12);
    expect(cal.current!.fit.offset).toBeCloseTo(-0.033 / 1.057, 12);
    const c = applyCalibration(cal);
    // corrected = (shown − 33 mA) / 1.057
    for (const a of [0.05, 0.5, 1, 1.5, 3]) expect(c.current(shown(a))).toBeCloseTo(a, 12);
    expect(cal.current!.points[0]!.nominal).toBeCloseTo(0.033, 12);
    // No spread was recorded, so none is stored.
    expect(cal.current!.points[0]!.raw_sd).toBeUndefined();
    expect(lines.join('\n')).toContain('current: reference = 0.946074 × nominal - 0.0312204 A');
    expect(lines.join('\n')).toContain(`wrote ${out}`);
  });

  it('warns about a point that does not fit the line and says what to do', async () => {
    const truths = [0, 0.5, 1, 1.5, 2, 2.5];
    const points = truths.map((a, i) => ({
      quantity: 'current',
      // the fourth reading was typed 1.05 instead of 1.50
      reference: i === 3 ? 1.05 : a,
      accuracy: '0.2%+0.001',
      raw_mean: chain.countsForAmps(shown(a)) + [0.3, -0.2, 0.1, 0, -0.3, 0.2][i]!,
      raw_sd: 0.8,
      samples: 50,
    }));
    const { lines } = await fromPoints(points);
    const text = lines.join('\n');
    expect(text).toContain('current point 4 does not fit the line');
    expect(text).toContain('retake it, or check the reading typed for it');
    expect(text).toMatch(/ 4 .*<- does not fit/);
  });

  it('refuses readings typed in mA (gain near 1000) without writing anything', async () => {
    const points = [0, 1, 2].map((a) => ({
      quantity: 'current',
      reference: a * 1000,
      u: 1,
      raw_mean: chain.countsForAmps(shown(a)),
    }));
    const e = await refusal(fromPoints(points));
    expect(e.code).toBe(ErrorCodes.CALIBRATION_FIT);
    expect(e.message).toContain('(not mA)');
    expect(await readdir(dir)).toEqual(['points.json']);
  });

  it('refuses references that fall as the rig reading rises', async () => {
    const points = [0, 1].map((a) => ({
      quantity: 'current',
      reference: 1 - a,
      u: 0.001,
      raw_mean: chain.countsForAmps(shown(a)),
    }));
    const e = await refusal(fromPoints(points));
    expect(e.code).toBe(ErrorCodes.CALIBRATION_FIT);
    expect(e.message).toContain("falls as the rig's reading rises");
  });

  it('takes one temperature point as an offset (gain 1)', async () => {
    const { out } = await fromPoints([
      { quantity: 'temperature', reference: 25, u: 0.1, raw_mean: chain.countsForCelsius(24.2) },
    ]);
    const cal = await loadCalibration(out);
    expect(cal.temperature!.fit.model).toBe('offset');
    expect(cal.temperature!.fit.offset).toBeCloseTo(0.8, 9);
    expect(applyCalibration(cal).temperature(30)).toBeCloseTo(30.8, 9);
  });

  it('refuses to be mixed with a rig', async () => {
    const e = await refusal(fromPoints([], { sim: 'demo' }));
    expect(e.code).toBe(ErrorCodes.USAGE);
    expect(e.message).toContain('--from-points');
  });
});

describe('degenerate points (checked on every fit)', () => {
  const p = (nominal: number, reference: number, u = 0.001) => ({
    raw_mean: 0,
    nominal,
    nominal_u: 0.0002,
    reference,
    reference_u: u,
  });

  it('refuses a gain from one point', () => {
    expect(() => fitCheckedQuantity('current', [p(1, 1)])).toThrowError(/at least 2 points/);
  });

  it('refuses readings that differ by less than their uncertainty', () => {
    let e: unknown;
    try {
      fitCheckedQuantity('voltage', [p(3.9, 4.0), p(4.1, 4.001)]);
    } catch (err) {
      e = err;
    }
    expect((e as CellvigilError).code).toBe(ErrorCodes.CALIBRATION_FIT);
    expect((e as Error).message).toContain('nearly the same reference reading');
  });

  it('refuses points where the rig read the same each time (the condition did not change)', () => {
    expect(() => fitCheckedQuantity('current', [p(1.2, 0), p(1.2001, 1.2)])).toThrowError(
      /the rig read the same current/,
    );
  });

  it('warns when the gain is poorly known', () => {
    const o = fitCheckedQuantity('voltage', [p(4.0, 4.0, 0.01), p(4.1, 4.1, 0.01)]);
    expect(o.warnings.join('\n')).toContain('the voltage gain is known only to');
  });
});
