import { describe, expect, it } from 'vitest';
import { checkPointsPlan } from '../../src/calibration/file-points.js';
import { parsePointsFile } from '../../src/calibration/points-file.js';
import { CellvigilError, ErrorCodes } from '../../src/core/errors.js';

function refusal(fn: () => unknown): CellvigilError {
  try {
    fn();
  } catch (e) {
    expect(e).toBeInstanceOf(CellvigilError);
    return e as CellvigilError;
  }
  throw new Error('accepted');
}

const GOOD = `reference_instrument: bench DMM, 10 A range
points:
  - { quantity: current, load: off, reference: 0, u: 0 }
  - { quantity: current, load: on, reference: 1.183, accuracy: "0.5%+0.003", seconds: 8 }
  - { quantity: voltage, load: off, reference: 4.102, accuracy: "0.05%+0.002" }
  - { quantity: voltage, load: on, reference: 4.031, u: 0.0015, note: loaded }
  - { quantity: temperature, reference: 23.4, u: 0.2 }
`;

describe('points file', () => {
  it('reads the mapping form with the instrument, conditions, readings and uncertainties', () => {
    const f = parsePointsFile(GOOD, 'points.yaml');
    expect(f.referenceInstrument).toBe('bench DMM, 10 A range');
    expect(f.points.map((p) => [p.index, p.quantity, p.load, p.reference])).toEqual([
      [1, 'current', false, 0],
      [2, 'current', true, 1.183],
      [3, 'voltage', false, 4.102],
      [4, 'voltage', true, 4.031],
      [5, 'temperature', null, 23.4],
    ]);
    expect(f.points[1]!.referenceU).toBeCloseTo((0.005 * 1.183 + 0.003) / Math.sqrt(3), 15);
    expect(f.points[1]!.seconds).toBe(8);
    expect(f.points[3]!.referenceU).toBe(0.0015);
    expect(f.points[3]!.note).toBe('loaded');
    expect(() => checkPointsPlan(f, 'capture', false)).not.toThrow();
  });

  it('reads a bare JSON list, with raw means for --from-points', () => {
    const f = parsePointsFile(
      JSON.stringify([
        { quantity: 'current', reference: 0, u: 0, raw_mean: 22.4, raw_sd: 0.8, samples: 50 },
        { quantity: 'current', reference: 1.2, u: 0.002, raw_mean: 940.1 },
      ]),
      'points.json',
    );
    expect(f.referenceInstrument).toBeUndefined();
    expect(f.points[0]!.raw).toEqual({ mean: 22.4, sd: 0.8, samples: 50 });
    expect(() => checkPointsPlan(f, 'given', false)).not.toThrow();
    const e = refusal(() => checkPointsPlan(f, 'capture', true));
    expect(e.code).toBe(ErrorCodes.USAGE);
    expect(e.message).toContain('--from-points');
  });

  it('names the point and key of a malformed entry', () => {
    const e = refusal(() =>
      parsePointsFile('points:\n  - { quantity: curent, reference: 1, u: 0 }\n', 'p.yaml'),
    );
    expect(e.code).toBe(ErrorCodes.CONFIG_INVALID);
    expect(e.message).toContain('points.0.quantity must be one of voltage, current, temperature');
    expect(e.message).toContain('p.yaml');
    const k = refusal(() =>
      parsePointsFile(
        'points:\n  - { quantity: current, reference: 1, u: 0, lod: on }\n',
        'p.yaml',
      ),
    );
    expect(k.message).toContain('unknown key lod');
    const r = refusal(() =>
      parsePointsFile('points:\n  - { quantity: current, reference: "1.2 A", u: 0 }\n', 'p.yaml'),
    );
    expect(r.message).toContain('a reference must be a number');
  });

  it('needs exactly one of u and accuracy for a typed reading', () => {
    expect(
      refusal(() => parsePointsFile('- { quantity: current, reference: 1 }', 'p.yaml')).message,
    ).toContain('states no uncertainty');
    expect(
      refusal(() =>
        parsePointsFile('- { quantity: current, reference: 1, u: 0.1, accuracy: "1%" }', 'p.yaml'),
      ).message,
    ).toContain('both u and accuracy');
    expect(
      refusal(() => parsePointsFile('- { quantity: current, reference: truth, u: 0.1 }', 'p.yaml'))
        .message,
    ).toContain('truth reference');
    expect(
      refusal(() =>
        parsePointsFile('- { quantity: current, reference: 1, accuracy: "lots" }', 'p.yaml'),
      ).code,
    ).toBe(ErrorCodes.USAGE);
  });

  it('refuses before touching the rig: one point for a gain, the same reading twice, truth on a real rig', () => {
    const one = parsePointsFile(
      '- { quantity: current, load: on, reference: 1.2, u: 0.002 }',
      'p.yaml',
    );
    const e1 = refusal(() => checkPointsPlan(one, 'capture', false));
    expect(e1.code).toBe(ErrorCodes.CALIBRATION_FIT);
    expect(e1.message).toContain('at least 2 points');
    const same = parsePointsFile(
      '- { quantity: voltage, reference: 4.1, u: 0.002 }\n- { quantity: voltage, load: on, reference: 4.1, u: 0.002 }',
      'p.yaml',
    );
    const e2 = refusal(() => checkPointsPlan(same, 'capture', false));
    expect(e2.code).toBe(ErrorCodes.CALIBRATION_FIT);
    expect(e2.message).toContain('same reference reading');
    const truth = parsePointsFile('- { quantity: temperature, reference: truth }', 'p.yaml');
    expect(refusal(() => checkPointsPlan(truth, 'capture', false)).code).toBe(ErrorCodes.USAGE);
    expect(() => checkPointsPlan(truth, 'capture', true)).not.toThrow();
  });
});
