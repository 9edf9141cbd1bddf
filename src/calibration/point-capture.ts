/**
 * Taking one calibration point on a live rig: set the condition (load on or off), let it
 * settle, average the frames over the window. A loaded point is guarded frame by frame and the
 * load is switched off again when the point ends, whatever happened.
 */
import type { AnalogChain } from '../chain/analog-chain.js';
import type { Clock } from '../core/clock.js';
import { ErrorCodes, makeError } from '../core/errors.js';
import { FLAG_LOAD_ON } from '../protocol/messages.js';
import { PointWindow, type TruthSample, type WindowResult } from './capture.js';
import { checkBeforeLoad, checkUnderLoad, type LoadGuard } from './load-guard.js';
import type { RigLink } from './rig-link.js';

export interface CaptureSettings {
  link: RigLink;
  chain: AnalogChain;
  clock: Clock;
  channel: number;
  /** Wait after setting a condition before averaging, ms. */
  settleMs: number;
  /** Safety limits; without them no load may be switched on. */
  guard: LoadGuard | null;
  /** The simulator's true values, sampled at each frame (simulation only). */
  truth?: () => TruthSample;
  signal?: AbortSignal;
  /** Fewest frames a window must average. @default 5 */
  minFrames?: number;
}

export interface PointRequest {
  loadOn: boolean;
  windowMs: number;
  /** For messages: "point 3 (current, load on)". */
  label: string;
}

/** Resting voltage is read over this long before a load goes on, ms. */
const REST_CHECK_MS = 1000;

export async function capturePoint(s: CaptureSettings, req: PointRequest): Promise<WindowResult> {
  if (!req.loadOn) {
    await s.link.sleep(s.settleMs, s.signal);
    return averageWindow(s, false, req.windowMs, req.label, s.signal);
  }
  const guard = s.guard;
  if (!guard) {
    throw makeError(
      ErrorCodes.USAGE,
      'a loaded point needs the chemistry and cell count, so that its safety limits apply',
      req.label,
      'Give --chemistry and --cells (the cell on the rig), or take only load-off points.',
    );
  }
  const rest = await averageWindow(
    s,
    false,
    REST_CHECK_MS,
    `${req.label}, resting-voltage check`,
    s.signal,
    1,
  );
  const refusal = checkBeforeLoad(guard, s.chain.volts(rest.voltage.mean));
  if (refusal) throw refusal;

  // A broken limit aborts the waits of this point; the finally below switches the load off.
  const trip = new AbortController();
  const signal = s.signal ? AbortSignal.any([s.signal, trip.signal]) : trip.signal;
  const unwatch = s.link.onFrame((f) => {
    if (f.channel !== s.channel || trip.signal.aborted || (f.flags & FLAG_LOAD_ON) === 0) return;
    const thermistorOk = s.chain.thermistorState(f.tRaw) === 'ok';
    const broken = checkUnderLoad(
      guard,
      {
        volts: s.chain.volts(f.vRaw),
        amps: s.chain.amps(f.iRaw),
        celsius: thermistorOk ? s.chain.celsius(f.tRaw) : Number.NaN,
        thermistorOk,
        flags: f.flags,
      },
      req.label,
    );
    if (broken) trip.abort(broken);
  });
  try {
    await s.link.setLoad(true, signal);
    await s.link.sleep(s.settleMs, signal);
    return await averageWindow(s, true, req.windowMs, req.label, signal);
  } finally {
    unwatch();
    await s.link.setLoad(false);
  }
}

async function averageWindow(
  s: CaptureSettings,
  loadOn: boolean,
  windowMs: number,
  label: string,
  signal: AbortSignal | undefined,
  minFrames = s.minFrames ?? 5,
): Promise<WindowResult> {
  const startMs = s.clock.now();
  const w = new PointWindow({ channel: s.channel, loadOn, startMs, endMs: startMs + windowMs });
  const truth = s.truth;
  const off = s.link.onFrame((f, at) => {
    w.offer(f, at, truth && f.channel === s.channel ? truth() : undefined);
  });
  try {
    await s.link.sleep(windowMs, signal);
  } finally {
    off();
  }
  const r = w.result();
  if (w.frames < minFrames) {
    throw makeError(
      ErrorCodes.CALIBRATION_CAPTURE,
      `only ${w.frames} frame(s) with the load ${loadOn ? 'on' : 'off'} arrived on channel ${s.channel} in ${windowMs / 1000} s` +
        (r.skipped > 0 ? ` (${r.skipped} showed the load ${loadOn ? 'off' : 'on'})` : ''),
      label,
      'Check that the rig is sending frames on this channel (--channel) and lengthen the window (--seconds).',
    );
  }
  return r;
}
