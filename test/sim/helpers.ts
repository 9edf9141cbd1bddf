import { fileURLToPath } from 'node:url';
import type { RigProfile } from '../../src/chain/rig-profile-types.js';
import type { VirtualClock } from '../../src/core/clock.js';
import { encodeCommand } from '../../src/protocol/codec.js';
import type { Cell } from '../../src/sim/cell-model.js';
import { SimRig, type SimRigOptions } from '../../src/sim/sim-rig.js';

export const SCENARIO_FILE = fileURLToPath(
  new URL('../../config/sim-scenarios.yaml', import.meta.url),
);

/** The bench rig of config/rigs/bench-20mohm.yaml, inlined so these tests stand alone. */
export const BENCH_PROFILE: RigProfile = {
  name: 'bench rig, 20 mΩ shunt',
  adc: { bits: 12, vref_V: 3.3 },
  voltage: { divider_top_ohm: 10000, divider_bottom_ohm: 10000 },
  current: { shunt_ohm: 0.02, amplifier_gain: 30.3 },
  temperature: { ntc_r25_ohm: 10000, ntc_beta_K: 3950, fixed_ohm: 10000, ntc_position: 'low' },
  frame: { baud: 115200 },
};

/** An ideal source: fixed volts, no internal resistance, never runs down. */
export class IdealSource implements Cell {
  readonly stateOfCharge = 1;
  constructor(private readonly volts: number) {}
  ocvV(): number {
    return this.volts;
  }
  internalOhm(): number {
    return 0;
  }
  step(): void {}
}

export interface Harness {
  clock: VirtualClock;
  rig: SimRig;
  /** Every chunk the rig wrote, in order. */
  chunks: string[];
  lines(): string[];
  send(cmd: Parameters<typeof encodeCommand>[0]): void;
}

export function harness(rig: SimRig, clock: VirtualClock): Harness {
  const chunks: string[] = [];
  rig.start((c) => chunks.push(c));
  return {
    clock,
    rig,
    chunks,
    lines: () => chunks.join('').split('\n').slice(0, -1),
    send: (cmd) => rig.receive(encodeCommand(cmd)),
  };
}

export function simpleRig(clock: VirtualClock, over: Partial<SimRigOptions> = {}): SimRig {
  return new SimRig({
    clock,
    profile: BENCH_PROFILE,
    cell: new IdealSource(3.7),
    thermal: {
      ambientC: 25,
      heatCapacityJPerK: 40,
      conductanceWPerK: 0.1,
      loadHeatFraction: 0,
      extraHeatW: 0,
    },
    loadOhm: 3,
    mosfetOhm: 0.01,
    frontEnd: { inputOffsetV: 0, connectionOhm: 0, voltageGainError: 0, noiseCounts: 0 },
    clockError: 0,
    rigId: 'test-rig',
    firmware: 'sim-test',
    ...over,
  });
}
