import { describe, expect, it } from 'vitest';
import { applyCalibration } from '../../src/calibration/calibration.js';
import { emptyFrameValues, FrameMeasure } from '../../src/measure/frame-measure.js';

const chain = {
  volts: (raw: number) => raw * 0.0025,
  amps: (raw: number) => raw * 0.001,
  celsius: () => 25,
  thermistorState: () => 'ok' as const,
};

// docs/protocol.md, "Data frames (1.1)": with flag bit 4 the current flows into the cell and
// i_raw is the charger's monitor, amps = ADC volts × monitor_A_per_V (here 1.22e-3 V a count
// × 0.1 A/V); a v1 frame reads exactly as before.
describe('measuring 1.1 frames', () => {
  it('a charge frame (flags 18) reads the charger monitor, signed into the cell', () => {
    const m = new FrameMeasure(chain, applyCalibration(null), 0, {}, 1.22e-4);
    const v = m.values(
      { seq: 0, tickMs: 0, vRaw: 1600, iRaw: 2000, tRaw: 100, flags: 0x18 },
      emptyFrameValues(),
    );
    expect(v.amps).toBeCloseTo(-0.244, 12);
    expect(v.nominalA).toBeCloseTo(0.244, 12);
    expect(v.volts).toBe(4);
  });

  it('a discharge frame, and any frame of a rig without a charger, reads as in v1', () => {
    const m11 = new FrameMeasure(chain, applyCalibration(null), 0, {}, 1.22e-4);
    const v1 = new FrameMeasure(chain, applyCalibration(null), 0, {});
    for (const flags of [0x00, 0x01, 0x05]) {
      const f = { seq: 0, tickMs: 0, vRaw: 1500, iRaw: 500, tRaw: 100, flags };
      expect(m11.values(f, emptyFrameValues())).toEqual(v1.values(f, emptyFrameValues()));
      expect(v1.values(f, emptyFrameValues()).amps).toBe(0.5);
    }
  });
});
