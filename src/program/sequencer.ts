/**
 * The program sequencer: given a plan and the measured frames, it says which step is active,
 * when a step ends and why, and which intents the run should send. Pure and synchronous; time
 * comes from the frames. One segment per step; an abort ends the program with the channel at
 * rest, and nothing after it runs.
 */
import type { Plan, PlannedStep } from './program-types.js';
import {
  isAbort,
  type Intent,
  type ProgramFrame,
  type SegmentEnd,
  type SegmentRecord,
  type SequencerUpdate,
} from './sequence-types.js';
import {
  DEFAULTS,
  modeOf,
  plannedEnd,
  safetyEnd,
  storageStep,
  type ActiveStep,
  type SequencerOptions,
  type StepTracker,
} from './step-end.js';

export type SequencerState = 'idle' | 'running' | 'complete' | 'aborted';

function activate(p: PlannedStep, f: ProgramFrame): ActiveStep {
  const s = p.plan;
  if (s.kind === 'storage') return storageStep(s, f.voltageV);
  if (s.kind === 'charge') {
    const done = s.method === 'cc-cv' ? 'termination_current' : 'charger_ended';
    return { ...s, done };
  }
  if (s.kind === 'discharge') return { ...s, done: 'cutoff' };
  return s;
}

function intentsFor(step: ActiveStep): Intent[] {
  if (step.kind === 'charge')
    return [
      { type: 'set-charge', currentA: step.currentA, voltageV: step.targetV },
      { type: 'set-mode', mode: 'charge' },
    ];
  if (step.kind === 'discharge')
    return [
      { type: 'set-load', load: step.load },
      { type: 'set-mode', mode: 'discharge' },
    ];
  return [{ type: 'set-mode', mode: 'rest' }];
}

function setpointOf(step: ActiveStep): SegmentRecord['setpoint'] {
  if (step.kind === 'charge')
    return {
      method: step.method,
      current_A: step.currentA,
      voltage_V: step.targetV,
      done_below_A: step.doneBelowA,
      timeout_s: step.timeoutS,
    };
  if (step.kind === 'discharge') {
    const l = step.load;
    return {
      load: l.type,
      current_A: l.type === 'constant_current' ? l.A : null,
      power_W: l.type === 'constant_power' ? l.W : null,
      cutoff_V: step.cutoffV,
    };
  }
  return { duration_s: step.durationS, settle_V_per_s: step.settleVPerS };
}

const noUpdate = (): SequencerUpdate => ({ intents: [], ended: [], started: null, finished: null });

export class ProgramSequencer {
  private readonly o: Required<SequencerOptions>;
  private next = 0;
  private active: { step: ActiveStep; record: SegmentRecord; tracker: StepTracker } | null = null;
  private readonly done: SegmentRecord[] = [];
  private status: SequencerState = 'idle';

  constructor(
    private readonly plan: Plan,
    options: SequencerOptions = {},
  ) {
    this.o = { ...DEFAULTS, ...options };
  }

  get state(): SequencerState {
    return this.status;
  }

  /** Segments that have ended, in order (as many as the plan has steps at most). */
  get segments(): readonly SegmentRecord[] {
    return this.done;
  }

  /** The running segment, or null. */
  get current(): SegmentRecord | null {
    return this.active?.record ?? null;
  }

  /** Feeds one frame; the first frame starts the program. */
  onFrame(f: ProgramFrame): SequencerUpdate {
    if (this.status === 'idle') {
      this.status = 'running';
      return this.startNext(f, noUpdate());
    }
    if (this.status !== 'running' || this.active === null) return noUpdate();
    const { step, tracker } = this.active;
    const end = safetyEnd(step, f, tracker, this.o) ?? plannedEnd(step, f, tracker, this.o);
    if (end === null) return noUpdate();
    const u = noUpdate();
    this.endActive(f.t_ms, end, u);
    return isAbort(end) ? this.abort(end, u) : this.startNext(f, u);
  }

  /** Ends the program at once (the user stopped it, or the run ended for its own reason). */
  stop(t_ms: number): SequencerUpdate {
    if (this.status !== 'running') return noUpdate();
    const u = noUpdate();
    this.endActive(t_ms, 'stopped', u);
    return this.abort('stopped', u);
  }

  private endActive(t_ms: number, reason: SegmentEnd, u: SequencerUpdate): void {
    if (this.active === null) return;
    const rec = { ...this.active.record, ended_ms: t_ms, end_reason: reason };
    this.done.push(rec);
    u.ended.push(rec);
    this.active = null;
  }

  private abort(reason: SegmentEnd, u: SequencerUpdate): SequencerUpdate {
    this.status = 'aborted';
    u.intents = [{ type: 'set-mode', mode: 'rest' }];
    u.finished = { aborted: true, reason };
    return u;
  }

  private startNext(f: ProgramFrame, u: SequencerUpdate): SequencerUpdate {
    const p = this.plan.steps[this.next];
    if (p === undefined) {
      this.status = 'complete';
      u.intents.push({ type: 'set-mode', mode: 'rest' });
      u.finished = { aborted: false, reason: 'complete' };
      return u;
    }
    this.next++;
    const step = activate(p, f);
    const record: SegmentRecord = {
      index: this.done.length,
      kind: modeOf(step),
      purpose: p.plan.kind === 'storage' ? 'storage' : 'program',
      step: p.path,
      cycle: p.cycle,
      started_ms: f.t_ms,
      ended_ms: null,
      end_reason: null,
      setpoint: setpointOf(step),
    };
    const tracker: StepTracker = { startedMs: f.t_ms, holdSinceMs: null, window: [] };
    this.active = { step, record, tracker };
    u.started = record;
    // a charge outside its window, or without a temperature, never switches on
    const refused = step.kind === 'charge' ? safetyEnd(step, f, tracker, this.o) : null;
    if (refused !== null) {
      this.endActive(f.t_ms, refused, u);
      return this.abort(refused, u);
    }
    u.intents.push(...intentsFor(step));
    return u;
  }
}
