import { mkdtemp, readdir, readFile, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { CellvigilError, ErrorCodes } from '../../src/core/errors.js';
import {
  applyCalibration,
  calibrationId,
  canonicalJson,
  fitQuantity,
  sealCalibration,
  type CalibrationContent,
  type CalibrationPoint,
} from '../../src/calibration/calibration.js';
import {
  loadCalibration,
  parseCalibration,
  writeCalibration,
} from '../../src/calibration/calibration-file.js';

// Current shown by the chain: 33 mA + 1.057 × true current (fact of the trade: op-amp offset
// through the shunt plus connection resistance in series with a two-terminal shunt).
const shown = (trueA: number): number => 0.033 + 1.057 * trueA;
const point = (trueA: number): CalibrationPoint => ({
  raw_mean: shown(trueA) / 0.005,
  raw_sd: 0.4,
  samples: 50,
  nominal: shown(trueA),
  reference: trueA,
  reference_u: 0.001,
});

function content(): CalibrationContent {
  return {
    format: 1,
    rig: 'bench rig, 20 mΩ shunt',
    date: '2025-03-01T10:00:00Z',
    reference_instrument: 'bench multimeter, 10 A range',
    voltage: fitQuantity(
      'voltage',
      [
        { raw_mean: 1200, nominal: 1.9336, reference: 1.9401, reference_u: 0.0005 },
        { raw_mean: 2600, nominal: 4.1895, reference: 4.2008, reference_u: 0.0008 },
      ],
      'gain_offset',
    ).calibration,
    current: fitQuantity('current', [point(0.2), point(1), point(3)], 'gain_offset').calibration,
    temperature: fitQuantity(
      'temperature',
      [{ raw_mean: 2100, nominal: 24.2, reference: 25.0, reference_u: 0.2 }],
      'offset',
    ).calibration,
  };
}

function refusal(text: string): CellvigilError {
  try {
    parseCalibration(text, 'cal/bench.json');
  } catch (err) {
    expect(err).toBeInstanceOf(CellvigilError);
    return err as CellvigilError;
  }
  throw new Error('the calibration was accepted');
}

describe('calibration model', () => {
  it('corrects the 33 mA + 1.057 × I current channel to the true current (fact of the trade)', () => {
    const cal = sealCalibration(content());
    const c = applyCalibration(cal);
    for (const a of [0, 0.2, 1, 2.2, 3, 5]) expect(c.current(shown(a))).toBeCloseTo(a, 10);
    // corrected = (shown − 33 mA) / 1.057
    expect(c.current(1)).toBeCloseTo((1 - 0.033) / 1.057, 10);
  });

  it('the temperature may be offset-only: gain 1, the reference minus the nominal added', () => {
    const c = applyCalibration(sealCalibration(content()));
    expect(c.temperature(30)).toBeCloseTo(30.8, 12);
  });

  it('an uncalibrated corrector passes values through and is called "none"', () => {
    const c = applyCalibration(null);
    expect(c.id).toBe('none');
    expect([c.voltage(3.7), c.current(1.5), c.temperature(25)]).toEqual([3.7, 1.5, 25]);
  });

  it('a quantity the calibration does not cover passes through', () => {
    const { temperature: _dropped, ...rest } = content();
    const c = applyCalibration(sealCalibration(rest));
    expect(c.temperature(22.5)).toBe(22.5);
  });

  it('the id is 16 hex digits of the content, independent of key order and of the id itself', () => {
    const a = content();
    const id = calibrationId(a);
    expect(id).toMatch(/^[0-9a-f]{16}$/);
    const reordered = JSON.parse(canonicalJson(a)) as CalibrationContent;
    expect(calibrationId(reordered)).toBe(id);
    expect(calibrationId({ ...a, id: 'ffffffffffffffff' })).toBe(id);
    expect(calibrationId({ ...a, reference_instrument: 'another meter' })).not.toBe(id);
    expect(applyCalibration(sealCalibration(a)).id).toBe(id);
  });

  it('canonical JSON sorts keys at every level', () => {
    expect(canonicalJson({ b: 1, a: { d: [2, { f: 1, e: 0 }], c: 'x' } })).toBe(
      '{"a":{"c":"x","d":[2,{"e":0,"f":1}]},"b":1}',
    );
  });
});

describe('calibration files', () => {
  let dir: string;
  beforeEach(async () => {
    dir = await mkdtemp(join(tmpdir(), 'cellvigil-cal-'));
  });
  afterEach(async () => {
    await rm(dir, { recursive: true, force: true });
  });

  it('writes atomically and reads back the same calibration', async () => {
    const path = join(dir, 'bench.json');
    const written = await writeCalibration(path, content());
    expect(await readdir(dir)).toEqual(['bench.json']);
    const read = await loadCalibration(path);
    expect(read).toEqual(written);
    expect(read.id).toBe(calibrationId(content()));
  });

  it('rewriting replaces the file and gives a fresh id for new content', async () => {
    const path = join(dir, 'bench.json');
    const first = await writeCalibration(path, content());
    const second = await writeCalibration(path, { ...first, date: '2025-04-01T10:00:00Z' });
    expect(second.id).not.toBe(first.id);
    expect((await loadCalibration(path)).id).toBe(second.id);
    expect(await readdir(dir)).toEqual(['bench.json']);
  });

  it('a hand edit with a stale id is rejected, saying how to fix it', async () => {
    const path = join(dir, 'bench.json');
    await writeCalibration(path, content());
    const edited = JSON.parse(await readFile(path, 'utf8')) as Awaited<
      ReturnType<typeof writeCalibration>
    >;
    edited.current!.fit.offset = 0;
    await writeFile(path, JSON.stringify(edited));
    const err = await loadCalibration(path).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(CellvigilError);
    const e = err as CellvigilError;
    expect(e.code).toBe(ErrorCodes.CALIBRATION_INVALID);
    expect(e.message).toContain(path);
    expect(e.message).toContain(`does not match`);
    expect(e.message).toContain(`set "id" to "${calibrationId(edited)}"`);
    expect(e.message).toContain('calibrate again');
  });

  it('rejects a malformed file: unknown key, missing fit field, non-positive gain, not JSON', () => {
    const good = sealCalibration(content());
    const withExtra = { ...good, comment: 'x' };
    expect(refusal(JSON.stringify(withExtra)).message).toContain('(comment)');
    const noGain = JSON.parse(JSON.stringify(good)) as Record<
      string,
      Record<string, Record<string, unknown>>
    >;
    delete noGain['voltage']!['fit']!['gain'];
    const e = refusal(JSON.stringify(noGain));
    expect(e.code).toBe(ErrorCodes.CALIBRATION_INVALID);
    expect(e.message).toContain("voltage.fit must have required property 'gain'");
    expect(e.message).toContain('cal/bench.json');
    expect(e.message).toContain('calibrate again');
    const zeroGain = JSON.parse(JSON.stringify(good)) as typeof good;
    zeroGain.current!.fit.gain = 0;
    expect(refusal(JSON.stringify(zeroGain)).message).toContain('current.fit.gain must be > 0');
    expect(refusal('{"format": 1,').code).toBe(ErrorCodes.CALIBRATION_INVALID);
  });

  it('a missing file is a read error naming the path and what to do', async () => {
    const err = await loadCalibration(join(dir, 'none.json')).catch((e: unknown) => e);
    expect((err as CellvigilError).code).toBe(ErrorCodes.CONFIG_READ);
    expect((err as Error).message).toContain('cellvigil calibrate');
  });

  it('refuses to write into a folder that does not exist, leaving nothing behind', async () => {
    const err = await writeCalibration(join(dir, 'missing', 'bench.json'), content()).catch(
      (e: unknown) => e,
    );
    expect((err as CellvigilError).code).toBe(ErrorCodes.CALIBRATION_WRITE);
    expect(await readdir(dir)).toEqual([]);
  });

  it('fitting one point for gain and offset is refused before anything is written', () => {
    expect(() => fitQuantity('current', [point(1)], 'gain_offset')).toThrow(
      /Take a second point at a clearly different current/,
    );
  });
});
