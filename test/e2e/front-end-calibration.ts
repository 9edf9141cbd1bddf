/**
 * A calibration of the simulated board made the way a careful user would with a perfect
 * reference meter: many points over the working range, each a true value against what the
 * board's front end reads for it (noise off), fitted by the product's own fitter.
 */
import { AnalogChain } from '../../src/chain/analog-chain.js';
import { parseRigProfile } from '../../src/chain/rig-profile-file.js';
import {
  sealCalibration,
  fitQuantity,
  type Calibration,
  type CalibrationPoint,
} from '../../src/calibration/calibration.js';
import { FrontEnd } from '../../src/sim/front-end.js';
import { loadScenarios, pickScenario } from '../../src/sim/scenarios.js';
import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';

const root = (p: string): string => fileURLToPath(new URL(`../../${p}`, import.meta.url));

export function simulatedBoardCalibration(scenarioName: string): Calibration {
  const rigFile = root('config/rigs/bench-20mohm.yaml');
  const profile = parseRigProfile(readFileSync(rigFile, 'utf8'), rigFile);
  const scenario = pickScenario(loadScenarios(root('config/sim-scenarios.yaml')), scenarioName);
  const fe = scenario.front_end;
  const shunt = profile.current.shunt_ohm;
  const board = new FrontEnd(
    profile,
    {
      inputOffsetV: fe.current_offset_V ?? (fe.current_offset_A ?? 0) * shunt,
      connectionOhm: fe.current_gain_error * shunt,
      voltageGainError: fe.voltage_gain_error,
      noiseCounts: 0,
    },
    () => 0.5,
  );
  const chain = new AnalogChain(profile);
  const current: CalibrationPoint[] = [];
  for (let a = 0.1; a <= 2.0001; a += 0.05) {
    const counts = board.current(a).counts;
    current.push({
      raw_mean: counts,
      nominal: chain.amps(counts),
      reference: a,
      reference_u: 0.0005,
    });
  }
  const voltage: CalibrationPoint[] = [];
  for (let v = 2.4; v <= 4.3001; v += 0.05) {
    const counts = board.voltage(v).counts;
    voltage.push({
      raw_mean: counts,
      nominal: chain.volts(counts),
      reference: v,
      reference_u: 0.0005,
    });
  }
  return sealCalibration({
    format: 1,
    rig: scenario.rig.rig_id,
    date: '2026-12-01T10:00:00.000Z',
    reference_instrument: 'ideal reference (simulated board, noise off)',
    current: fitQuantity('current', current, 'gain_offset').calibration,
    voltage: fitQuantity('voltage', voltage, 'gain_offset').calibration,
  });
}
