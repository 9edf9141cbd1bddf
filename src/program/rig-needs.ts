/**
 * Whether a rig's channel can run every step of a plan, asked before anything is switched on:
 * the protocol's own gate (`refusal`) answers for each command the steps will need, so a v1 rig,
 * a charge without a charger or a current outside the load's range is refused up front.
 */
import { refusal, type RigCapabilities } from '../protocol/capabilities.js';
import { ErrorCodes, makeError, type CellvigilError } from '../core/errors.js';
import type { HostCommand11 } from '../protocol/messages.js';
import type { DischargeLoad, Plan } from './program-types.js';

/** Commands a discharge at `load` needs; `counts` turns amps into the load's setpoint counts. */
function loadCommands(
  channel: number,
  load: DischargeLoad,
  counts: (amps: number) => number,
  lowestV: number,
): HostCommand11[] {
  if (load.type === 'constant_current') return [{ command: 'ISET', channel, raw: counts(load.A) }];
  // Constant power held through the current setpoint: the highest current is at the lowest voltage.
  if (load.type === 'constant_power')
    return [{ command: 'ISET', channel, raw: counts(load.W / Math.max(lowestV, 1e-3)) }];
  return [];
}

function neededCommands(
  plan: Plan,
  channel: number,
  counts: (amps: number) => number,
): { cmd: HostCommand11; step: string }[] {
  const out: { cmd: HostCommand11; step: string }[] = [];
  for (const { plan: s, path } of plan.steps) {
    const push = (cmd: HostCommand11): number => out.push({ cmd, step: path });
    if (s.kind === 'charge') push({ command: 'MODE', channel, mode: 'charge' });
    if (s.kind === 'discharge') {
      loadCommands(channel, s.load, counts, s.cutoffV).forEach(push);
      push({ command: 'MODE', channel, mode: 'discharge' });
    }
    if (s.kind === 'storage') {
      push({ command: 'MODE', channel, mode: 'charge' });
      push({ command: 'ISET', channel, raw: counts(s.currentA) });
    }
    push({ command: 'MODE', channel, mode: 'rest' });
  }
  return out;
}

/** Why the rig cannot run the plan on `channel` (and for which step), or null when it can. */
export function planRefusal(
  rig: RigCapabilities,
  plan: Plan,
  channel: number,
  counts: (amps: number) => number,
): { error: CellvigilError; step: string } | null {
  for (const { cmd, step } of neededCommands(plan, channel, counts)) {
    const error = refusal(rig, cmd);
    if (error) return { error, step };
  }
  if (rig.protocol === '1.0') return null;
  const cap = rig.channels[channel];
  const resistor = plan.steps.find(
    (p) => p.plan.kind === 'discharge' && p.plan.load.type === 'resistor',
  );
  if (cap && resistor && cap.load !== 'switched')
    return {
      error: makeError(
        ErrorCodes.RIG_INCAPABLE,
        `rig ${rig.rigId}: channel ${channel} has a regulated load, not a resistor`,
        'host command',
        'Give the discharge a current (current_A or current_C) on this rig, or run it on a rig with a switched load.',
      ),
      step: resistor.path,
    };
  return null;
}
