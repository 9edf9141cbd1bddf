/**
 * When the active step ends, and why: pure checks of one frame against the step's plan. Safety
 * ends (temperature, over-voltage, charge timeout, a mode the rig did not take) are checked
 * before the planned ends, so a frame that shows both is an abort.
 */
import type { ChargePlan, DischargePlan, RestPlan, StoragePlan } from './program-types.js';
import type { ChannelMode, ProgramFrame, SegmentEnd } from './sequence-types.js';

/** A step as it runs: storage has become a charge or a discharge to the storage voltage. */
export type ActiveStep =
  | (Omit<ChargePlan, 'kind'> & { kind: 'charge'; done: SegmentEnd })
  | (Omit<DischargePlan, 'kind' | 'load'> & {
      kind: 'discharge';
      load: DischargePlan['load'];
      done: SegmentEnd;
    })
  | RestPlan;

export interface SequencerOptions {
  /** A termination or charger-ended condition must hold this long, ms. @default 10000 */
  holdMs?: number;
  /** The rig must report the commanded mode within this time, ms. @default 5000 */
  modeGraceMs?: number;
  /** Window over which a rest's dV/dt is taken, ms. @default 60000 */
  settleWindowMs?: number;
}

export const DEFAULTS: Required<SequencerOptions> = {
  holdMs: 10_000,
  modeGraceMs: 5_000,
  settleWindowMs: 60_000,
};

/** The CV phase counts as reached within this share below the target voltage. */
export const CV_BAND = 0.005;

/** What the sequencer keeps between frames of one segment; bounded by the settle window. */
export interface StepTracker {
  startedMs: number;
  holdSinceMs: number | null;
  window: { t: number; v: number }[];
}

/** Storage becomes a CC-CV charge up to the target, or a constant-current discharge down to it. */
export function storageStep(s: StoragePlan, restingV: number): ActiveStep {
  if (restingV < s.targetV)
    return {
      kind: 'charge',
      method: 'cc-cv',
      targetV: s.targetV,
      durationS: null,
      ...s.charge,
      done: 'storage_voltage',
    };
  return {
    kind: 'discharge',
    load: { type: 'constant_current', A: s.currentA },
    cutoffV: s.targetV,
    timeoutS: s.charge.timeoutS,
    maxTemperatureC: s.maxTemperatureC,
    done: 'storage_voltage',
  };
}

export function modeOf(step: ActiveStep): ChannelMode {
  return step.kind;
}

/** Ends no option can override: temperature, over-voltage, charge timeout, an unconfirmed mode. */
export function safetyEnd(
  step: ActiveStep,
  f: ProgramFrame,
  tr: StepTracker,
  o: Required<SequencerOptions>,
): SegmentEnd | null {
  const elapsed = f.t_ms - tr.startedMs;
  if (step.kind === 'charge') {
    if (f.temperatureC === null) return 'temperature_unknown';
    if (f.temperatureC > step.maxTemperatureC) return 'over_temperature';
    if (f.temperatureC < step.minTemperatureC) return 'under_temperature';
    if (f.voltageV > step.ceilingV) return 'over_voltage';
    // a timed charge as long as the timeout ends on its time, as planned
    const timed = step.method === 'time' && elapsed >= step.durationS! * 1000;
    if (!timed && elapsed >= step.timeoutS * 1000) return 'charge_timeout';
  } else if (step.kind === 'discharge') {
    if (f.temperatureC !== null && f.temperatureC > step.maxTemperatureC) return 'over_temperature';
  }
  if (elapsed >= o.modeGraceMs && f.mode !== modeOf(step)) return 'mode_not_confirmed';
  return null;
}

/** True once `cond` has held for holdMs; the tracker remembers since when. */
function held(cond: boolean, f: ProgramFrame, tr: StepTracker, holdMs: number): boolean {
  if (!cond) {
    tr.holdSinceMs = null;
    return false;
  }
  tr.holdSinceMs ??= f.t_ms;
  return f.t_ms - tr.holdSinceMs >= holdMs;
}

function chargeEnd(
  s: Extract<ActiveStep, { kind: 'charge' }>,
  f: ProgramFrame,
  tr: StepTracker,
  o: Required<SequencerOptions>,
): SegmentEnd | null {
  const elapsed = f.t_ms - tr.startedMs;
  if (s.method === 'time') return elapsed >= s.durationS! * 1000 ? 'charge_time' : null;
  // A storage charge ends when the voltage under charge reaches the storage voltage: a 1.1 rig's
  // charger holds its own, full-charge voltage (no wire command sets it), so waiting for a taper
  // there would carry the cell past storage into the over-voltage end. At rest afterwards the
  // cell reads a little below it (its I·R and polarisation drop away), which storage allows.
  if (s.done === 'storage_voltage') return f.voltageV >= s.targetV ? s.done : null;
  const into = -f.currentA;
  // a charger not yet started draws nothing either; the mode grace covers its start
  if (elapsed < o.modeGraceMs) return null;
  const cv = s.method === 'charger' || f.voltageV >= s.targetV * (1 - CV_BAND);
  return held(cv && into <= s.doneBelowA!, f, tr, o.holdMs) ? s.done : null;
}

function restEnd(
  s: RestPlan,
  f: ProgramFrame,
  tr: StepTracker,
  windowMs: number,
): SegmentEnd | null {
  if (f.t_ms - tr.startedMs >= s.durationS * 1000) return 'rest_time';
  if (s.settleVPerS === null) return null;
  tr.window.push({ t: f.t_ms, v: f.voltageV });
  while (tr.window.length > 2 && f.t_ms - tr.window[1]!.t >= windowMs) tr.window.shift();
  const first = tr.window[0]!;
  const span = f.t_ms - first.t;
  if (span < windowMs) return null;
  const slope = Math.abs(f.voltageV - first.v) / (span / 1000);
  return slope <= s.settleVPerS ? 'voltage_settled' : null;
}

/** The planned end of the step on this frame, or null while it goes on. */
export function plannedEnd(
  step: ActiveStep,
  f: ProgramFrame,
  tr: StepTracker,
  o: Required<SequencerOptions>,
): SegmentEnd | null {
  if (step.kind === 'charge') return chargeEnd(step, f, tr, o);
  if (step.kind === 'rest') return restEnd(step, f, tr, o.settleWindowMs);
  if (f.voltageV <= step.cutoffV) return step.done;
  if (step.timeoutS !== null && f.t_ms - tr.startedMs >= step.timeoutS * 1000)
    return 'discharge_time';
  // The cell can no longer drive the set current through the load: the step is over, and
  // its current no longer the stated one (so it is no full cycle).
  if (held(f.setpointNotHeld === true, f, tr, o.holdMs)) return 'setpoint_not_held';
  return null;
}
