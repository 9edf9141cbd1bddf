import { fileURLToPath } from 'node:url';
import type { RigProfile } from '../../src/chain/rig-profile-types.js';
import type { CalibrateConnection } from '../../src/calibration/calibrate-run.js';
import type { TruthSample } from '../../src/calibration/capture.js';
import type { VirtualClock } from '../../src/core/clock.js';
import {
  loadScenarios,
  pickScenario,
  type SimOverrides,
  type SimScenario,
} from '../../src/sim/scenarios.js';
import { SimSource } from '../../src/sources/sim-source.js';

export const SCENARIO_FILE = fileURLToPath(
  new URL('../../config/sim-scenarios.yaml', import.meta.url),
);
export const BENCH_RIG = fileURLToPath(
  new URL('../../config/rigs/bench-20mohm.yaml', import.meta.url),
);

export function scenario(name: string): SimScenario {
  return pickScenario(loadScenarios(SCENARIO_FILE), name);
}

/** A simulated rig on `clock`, as `calibrate --sim` would open it, with the rig itself at hand. */
export function simConnection(
  clock: VirtualClock,
  s: SimScenario,
  profile: RigProfile,
  overrides: SimOverrides = {},
): CalibrateConnection & { source: SimSource; truth: () => TruthSample } {
  const source = new SimSource({ scenario: s, clock, profile, overrides });
  return {
    source,
    clock,
    truth: () => {
      const t = source.rig.truth();
      return { voltage: t.terminalV, current: t.currentA, temperature: t.temperatureC };
    },
  };
}

/**
 * Runs `work` while moving the virtual clock in small steps, yielding to the event loop between
 * steps so that promise continuations run as they would against a real clock.
 */
export async function drive<T>(clock: VirtualClock, work: Promise<T>, stepMs = 20): Promise<T> {
  let settled = false;
  work.then(
    () => (settled = true),
    () => (settled = true),
  );
  while (!settled) {
    clock.advance(stepMs);
    await new Promise<void>((r) => setImmediate(r));
  }
  return work;
}
