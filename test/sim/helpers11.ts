import { fileURLToPath } from 'node:url';
import { loadRigProfile } from '../../src/chain/rig-profile-file.js';
import type { RigProfile } from '../../src/chain/rig-profile-types.js';
import { VirtualClock } from '../../src/core/clock.js';
import { encodeCommand, frameLine } from '../../src/protocol/codec.js';
import { decodeRigLine11 } from '../../src/protocol/codec11.js';
import type { DataFrame, HostCommand } from '../../src/protocol/messages.js';
import { buildSimRig, loadScenarios, pickScenario } from '../../src/sim/scenarios.js';
import type { SimRig } from '../../src/sim/sim-rig.js';
import { SCENARIO_FILE } from './helpers.js';

export const SIM_CC_PROFILE: RigProfile = await loadRigProfile(
  fileURLToPath(new URL('../../config/rigs/sim-cc.yaml', import.meta.url)),
);

/** A payload framed as the host frames it, past any guard: for the rig's own refusals. */
export const raw = (payload: string): string => frameLine(`C,${payload}`);

export interface Rig11 {
  clock: VirtualClock;
  rig: SimRig;
  lines(): string[];
  /** Lines heard from index `from` on, without their CRC. */
  payloads(from?: number): string[];
  frames(from?: number): DataFrame[];
  send(cmd: HostCommand | string): void;
  /** Advances `seconds` with a BEAT every second; stops early when `stop` holds. */
  run(seconds: number, stop?: () => boolean): number;
}

/** A cycling scenario's rig on the simulated CC rig's profile, started. */
export function rig11(name: string, profile: RigProfile = SIM_CC_PROFILE): Rig11 {
  const clock = new VirtualClock();
  const set = loadScenarios(SCENARIO_FILE);
  const rig = buildSimRig(pickScenario(set, name), clock, profile);
  const chunks: string[] = [];
  rig.start((c) => chunks.push(c));
  const lines = (): string[] => chunks.join('').split('\n').slice(0, -1);
  const decoded = (from = 0) =>
    lines()
      .slice(from)
      .map((l) => {
        const r = decodeRigLine11(l, profile.adc.bits);
        if (!r.ok) throw new Error(`rejected ${r.reason}: ${JSON.stringify(l)}`);
        return r.message;
      });
  return {
    clock,
    rig,
    lines,
    payloads: (from = 0) =>
      lines()
        .slice(from)
        .map((l) => l.replace(/\|[0-9A-F]{4}\r?$/, '')),
    frames: (from = 0) => decoded(from).filter((m): m is DataFrame => m.kind === 'data'),
    send: (cmd) => rig.receive(typeof cmd === 'string' ? cmd : encodeCommand(cmd)),
    run(seconds, stop) {
      for (let s = 1; s <= seconds; s++) {
        clock.advance(1000);
        rig.receive(encodeCommand({ command: 'BEAT' }));
        if (stop?.()) return s;
      }
      return seconds;
    },
  };
}
