/**
 * The recompute of a program run's segments: every row measured again (the same measuring step
 * as the live run, the charger's monitor included), placed in the segment whose
 * [started_ms, next started_ms) holds its host time, and fed to the same accounting the live
 * run used, so each segment's figures come out equal to the live ones to the last digit. A
 * segment the interruption of the run cut off (no line in segments.jsonl) is recorded
 * `interrupted`: its figures are what the rows hold, and a discharge cut this way is no cycle.
 */
import { applyCalibration, type Calibration } from '../calibration/calibration.js';
import { AnalogChain } from '../chain/analog-chain.js';
import {
  emptyFrameTime,
  emptyFrameValues,
  FrameMeasure,
  type FrameTime,
  type FrameValues,
} from '../measure/frame-measure.js';
import type { PlannedStep } from '../program/program-types.js';
import { SEGMENT_STATE } from '../program/sequence-types.js';
import {
  emptyAccountedFrame,
  SegmentAccounting,
  type AccountedFrame,
} from '../program/segment-accounting.js';
import type { RunManifest } from '../record/manifest.js';
import type { SegmentFigures } from '../record/result.js';
import type { SegmentLine } from '../record/segments.js';
import type { SampleRecord } from '../replay/sample-csv.js';
import { FLAG_LOAD_ON } from '../protocol/messages.js';
import { plausibilityFor } from '../session/plausibility.js';
import { RestingTemperature } from './resting-temperature.js';

/** Loaded current is taken for the verdict's range only this long after a switch-on, s. */
const SETTLE_S = 5;

/** What a rated-capacity check needs of a discharge segment beyond its figures. */
export interface SegmentConditions {
  /** Lowest and highest loaded current after the first seconds, A. */
  minA: number | null;
  maxA: number | null;
  /** Mean resting temperature before the load went on, °C. */
  startC: number | null;
}

/** A row's state back to its segment's kind (the inverse of SEGMENT_STATE). */
const KIND_OF_STATE: Record<string, SegmentLine['kind']> = Object.fromEntries(
  Object.entries(SEGMENT_STATE).map(([kind, state]) => [state, kind]),
) as Record<string, SegmentLine['kind']>;

export class ProgramRecompute {
  private readonly frames: FrameMeasure;
  private readonly accounting: SegmentAccounting;
  private readonly values: FrameValues = emptyFrameValues();
  private readonly stamp: FrameTime = emptyFrameTime();
  private readonly frame: AccountedFrame = emptyAccountedFrame();
  private readonly figures: SegmentFigures[] = [];
  /** Index of the segment the last rows went to; -1 before the program started. */
  private current = -1;
  /** The segment the interruption cut off, once its first row came. */
  private cut: { kind: SegmentLine['kind']; startedMs: number } | null = null;
  private lastMs = 0;
  private readonly conditions = new Map<number, SegmentConditions>();
  private readonly restTemps = new RestingTemperature();
  private onSinceMs: number | null = null;

  constructor(
    private readonly manifest: RunManifest,
    calibration: Calibration | null,
    private readonly segments: readonly SegmentLine[],
  ) {
    const chain = new AnalogChain(manifest.rig.profile);
    const charger = manifest.rig.profile.charger;
    const chargerApc = charger ? chain.adcVoltsPerCount * charger.monitor_A_per_V : null;
    this.frames = new FrameMeasure(chain, applyCalibration(calibration), 0, {}, chargerApc);
    const chem = manifest.chemistry.profile;
    this.accounting = new SegmentAccounting({
      maxVolts: plausibilityFor({
        maxRestVPerCell: chem.max_rest_V_per_cell.value,
        cells: manifest.cells,
        ampsPerCount: chain.ampsPerCount,
      }).maxVolts,
      ampsPerCount: chain.ampsPerCount,
      chargerAmpsPerCount: chargerApc,
      voltsPerCount: chain.voltsPerCount,
      calibration,
    });
  }

  /** One row, in the order the run logged them. */
  sample(s: Readonly<SampleRecord>): void {
    const v = this.frames.values(s, this.values);
    const t = this.stamp;
    t.runMs = Math.round(s.hostS * 1000);
    this.frames.restamp(s, t);
    const f = this.frame;
    f.dtMs = t.dtMs;
    f.gap = t.gap;
    f.volts = v.volts;
    f.amps = v.amps;
    f.nominalA = v.nominalA;
    f.flags = s.flags;
    this.place(t.runMs, s.state, f);
    this.watch(t.runMs, v.amps, v.celsius, s.flags);
    this.lastMs = t.runMs;
  }

  /** The loaded current's range and the resting temperature before the load, per segment. */
  private watch(ms: number, amps: number, celsius: number, flags: number): void {
    const on = (flags & FLAG_LOAD_ON) !== 0 && amps > 0;
    if (!on) {
      this.onSinceMs = null;
      this.restTemps.add(celsius);
      return;
    }
    let c = this.conditions.get(this.current);
    if (c === undefined) {
      c = { minA: null, maxA: null, startC: this.restTemps.mean() };
      this.conditions.set(this.current, c);
    }
    this.onSinceMs ??= ms;
    if (ms - this.onSinceMs < SETTLE_S * 1000) return;
    c.minA = Math.min(c.minA ?? amps, amps);
    c.maxA = Math.max(c.maxA ?? amps, amps);
  }

  /** The conditions of a discharge segment, for the rated-capacity check of its cycle. */
  conditionsOf(index: number): SegmentConditions {
    return this.conditions.get(index) ?? { minA: null, maxA: null, startC: null };
  }

  private place(ms: number, state: string, f: AccountedFrame): void {
    const segs = this.segments;
    if (this.accounting.isActive) {
      const cur = segs[this.current];
      const inCut = cur === undefined && KIND_OF_STATE[state] === this.cut?.kind;
      if (inCut || (cur !== undefined && ms <= cur.ended_ms)) this.accounting.add(f);
      if (cur !== undefined && ms >= cur.ended_ms) this.close(cur);
    }
    // Segments that start at this row (more than one when a step ended as soon as it began).
    while (this.current + 1 < segs.length && segs[this.current + 1]!.started_ms <= ms) {
      const next = segs[++this.current]!;
      this.accounting.begin(f);
      if (next.ended_ms <= ms) this.close(next);
    }
    // Past the last recorded segment, a row in a segment's state starts the one the
    // interruption cut off (its line was never written).
    const kind = KIND_OF_STATE[state];
    if (!this.accounting.isActive && this.cut === null && kind !== undefined) {
      const last = segs.at(-1);
      if (this.current === segs.length - 1 && (last === undefined || ms >= last.ended_ms)) {
        this.current = segs.length;
        this.cut = { kind, startedMs: ms };
        this.accounting.begin(f);
      }
    }
  }

  private close(seg: Parameters<SegmentAccounting['close']>[0]): void {
    this.figures.push(this.accounting.close(seg));
  }

  /**
   * The segments' figures; `interrupted`: the run never finished, so a segment still running
   * at its last row is recorded as cut off there.
   */
  finish(interrupted: boolean): SegmentFigures[] {
    const cut = this.cut;
    if (this.accounting.isActive && cut !== null && interrupted) {
      const index = this.current;
      const step: PlannedStep | undefined = this.manifest.program?.plan.steps[index];
      const started = cut.startedMs;
      this.close({
        index,
        kind: cut.kind,
        purpose: step?.plan.kind === 'storage' ? 'storage' : 'program',
        step: step?.path ?? `steps[${index}]`,
        cycle: step?.cycle ?? null,
        started_ms: started,
        ended_ms: Math.max(started, this.lastMs),
        end_reason: 'interrupted',
        setpoint: {},
      });
    }
    return this.figures;
  }
}
