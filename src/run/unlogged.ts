/**
 * The first frame after resuming a run whose load was on when the daemon died: what flowed
 * while nothing was logging, estimated at the last logged current and counted in full as doubt.
 */
import { FLAG_LOAD_ON } from '../protocol/messages.js';
import type { RunEvent } from '../record/events.js';
import type { Integrator } from '../session/integrator.js';
import type { SampleRow } from '../sinks/sample-row.js';
import type { ResumePoint } from './resume.js';

/**
 * After the daemon died with the load on, the rig kept discharging until its watchdog cut the
 * load: 5 s after the last heartbeat, which came up to 0.5 s before death, which came up to 1 s
 * (one flush) after the last logged row. The middle of that range, ± 0.75 s.
 */
const UNLOGGED_AFTER_DEATH_S = 5 + 0.5 - 0.25;

/** Adds the estimate to the integrator and to the row's totals; returns the event that says so. */
export function bridgeUnlogged(resume: ResumePoint, integ: Integrator, row: SampleRow): RunEvent {
  const last = resume.last!;
  const sinceS = row.hostS - resume.lastHostS;
  const stillOn = (row.flags & FLAG_LOAD_ON) !== 0;
  const darkS = Math.max(0, stillOn ? sinceS : Math.min(sinceS, UNLOGGED_AFTER_DEATH_S));
  integ.addUnlogged(darkS * 1000, last.volts, last.amps);
  row.chargeAh = integ.chargeAh;
  row.energyWh = integ.energyWh;
  return {
    event: 'unlogged_discharge',
    estimated_s: darkS,
    charge_Ah: (darkS / 3600) * last.amps,
    basis: stillOn
      ? 'the load stayed on through the interruption: the last logged current over the whole gap'
      : "the rig's watchdog cut the load: the last logged current for about 5.25 s (± 0.75 s)",
  };
}
