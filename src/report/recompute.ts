/**
 * Every figure of a run, recomputed from its raw counts: counts -> the rig profile's analog
 * chain -> a calibration (the run's own or another) -> the same trapezoidal integrator the
 * daemon uses. `RunRecompute` is the pure core fed one row at a time; `recomputeRun` streams a
 * run folder through it.
 */
import { applyCalibration, type Calibration } from '../calibration/calibration.js';
import { AnalogChain } from '../chain/analog-chain.js';
import { packageVersion } from '../core/paths.js';
import {
  emptyFrameTime,
  emptyFrameValues,
  FrameMeasure,
  type FrameTime,
  type FrameValues,
} from '../measure/frame-measure.js';
import { forEachRunSample, readRunEvents, type RunFolder } from '../replay/run-folder.js';
import type { Checkpoint } from '../record/checkpoint.js';
import type { RunManifest } from '../record/manifest.js';
import type { SampleRecord } from '../replay/sample-csv.js';
import { runUncertainty } from '../results/uncertainty.js';
import { buildResult, CLOCK_WARN_PPM, type RunResult } from '../record/result.js';
import { Integrator } from '../session/integrator.js';
import { Plausibility, plausibilityFor } from '../session/plausibility.js';
import type { SessionEnd } from '../session/session-types.js';
import { CurveBuilder, loadedVoltageAtCharge, type CurveBucket, type CurvePoint } from './curve.js';
import { DcResistanceTracker, type ResistanceSummary } from './dc-resistance.js';
import { EventDigest, type EventDigestResult, type RunEnd } from './event-digest.js';
import { checkedDischarge, programVerdict } from './program-verdict.js';
import { RestingTemperature } from './resting-temperature.js';
import { ratedCapacityVerdict, type Verdict } from './verdicts.js';
import { VoltageSteps, type VoltageStepRow } from './voltage-steps.js';

import { withProgram } from './program-result.js';
import { readSegments } from '../record/segments.js';
import { ProgramRecompute } from './recompute-program.js';

export interface RecomputeOptions {
  /** The calibration to apply: absent, the run's own (from its manifest); null, none (nominal chain). */
  calibration?: Calibration | null;
  /** Where that calibration was read from, for the report. */
  calibrationFile?: string;
  /** Voltage step of the capacity table, V per cell. @default 0.05 */
  stepPerCellV?: number;
  /** The cell's rated capacity, Ah. */
  ratedAh?: number | null;
  /** Allowed deviation of the mean current from 0.2 It for a verdict. @default 0.05 */
  rateTolerance?: number;
  /** Bytes of sample files read so far and in all. */
  onProgress?: (doneBytes: number, totalBytes: number) => void;
}

/** result.json as a recompute writes it: the daemon's keys and a few more. */
export type RecomputedResult = RunResult & {
  midpoint_voltage_V: number | null;
  average_current_A: number | null;
  rated_Ah: number | null;
  c_rate: number | null;
  percent_of_rated: number | null;
  capacity_by_voltage: Array<{
    V_per_cell: number;
    V: number;
    capacity_Ah: number | null;
    energy_Wh: number | null;
    load_on_s: number | null;
  }>;
  verdict: { standard: string; label: string; outcome: string; summary: string } | null;
  recomputed: {
    cellvigil_version: string;
    calibration_file: string | null;
    from_rows: number;
    cut_lines: number;
  };
};

export interface RunFigures {
  folder: string;
  manifest: RunManifest;
  result: RecomputedResult;
  /** The run's result.json as it was, or null. */
  original: RunResult | null;
  calibration: {
    applied: Calibration | null;
    id: string;
    /** True when the applied calibration is the run's own (its manifest's). */
    own: boolean;
    file: string | null;
    /** Calibration ids the rows were made with during the live run. */
    liveIds: string[];
  };
  steps: VoltageStepRow[];
  stepPerCellV: number;
  resistance: ResistanceSummary;
  verdict: Verdict | null;
  frames: {
    accepted: number;
    rejected: number;
    lost: number;
    gaps: number;
    rigRestarts: number;
    loadedFrames: number;
    meanIntervalS: number | null;
  };
  clock: { errorPpm: number | null; warning: boolean };
  temperature: {
    startC: number | null;
    minC: number | null;
    maxC: number | null;
    endC: number | null;
  };
  current: { minA: number | null; maxA: number | null; noiseA: number | null };
  voltageNoiseV: number | null;
  loadSwitchOns: number;
  /** The live run's totals in the last row integrated (for comparison). */
  liveTotals: { chargeAh: number; energyWh: number } | null;
  curve: readonly CurveBucket[];
  events: EventDigestResult;
  cautions: string[];
  notes: string[];
}

/** Loaded current steps larger than this (relative) are load changes, not noise. */
const LEVEL_CHANGE = 0.2;
/** The first seconds after switch-on, left out of the current range (contact settling). */
const SETTLE_S = 5;
/** Distinct codes tracked for the quantisation term; beyond this they are plenty anyway. */
const MAX_CODES = 65536;
/** The verdict as result.json keeps it. */
function verdictKeys(v: Verdict | null): RecomputedResult['verdict'] {
  return v
    ? { standard: v.standard, label: v.label, outcome: v.outcome, summary: v.summary }
    : null;
}

const rn = (x: number | null, digits: number): number | null =>
  x === null || !Number.isFinite(x) ? null : Number(x.toFixed(digits));

/** Running sum of squared differences between consecutive loaded readings. */
class DiffNoise {
  private ss = 0;
  private n = 0;
  add(a: number, b: number): void {
    this.ss += (b - a) ** 2;
    this.n++;
  }
  /** s of one reading: the difference of two independent readings has variance 2s². */
  sd(): number | null {
    return this.n >= 10 ? Math.sqrt(this.ss / (2 * this.n)) : null;
  }
}

/** Distinct raw counts (0 to 2^24 − 1, as sample rows allow): a bit each, cheaper than a hash set per row. */
class DistinctCodes {
  private readonly bits = new Uint32Array(2 ** 24 / 32);
  size = 0;

  add(code: number): void {
    const word = code >>> 5;
    const mask = 1 << (code & 31);
    const have = this.bits[word]!;
    if ((have & mask) !== 0) return;
    this.bits[word] = have | mask;
    this.size++;
  }
}

/** States in which the session checks a frame's readings before integrating it. */
const CHECKED_STATES = new Set(['starting', 'discharging', 'stopping', 'ended']);

export class RunRecompute {
  private readonly chain: AnalogChain;
  private readonly frames: FrameMeasure;
  private readonly values: FrameValues = emptyFrameValues();
  private readonly stamp: FrameTime = emptyFrameTime();
  private readonly integrator = new Integrator();
  /** The live run's check of readings that cannot be true, applied to the same rows. */
  private readonly plausibility: Plausibility;
  private readonly plausibleIn = { atMs: 0, volts: 0, amps: 0, loadOn: false };
  private readonly digest = new EventDigest();
  private readonly curve = new CurveBuilder();
  private readonly steps: VoltageSteps;
  private readonly resistance = new DcResistanceTracker({ levelChange: LEVEL_CHANGE });
  private readonly noiseI = new DiffNoise();
  private readonly noiseV = new DiffNoise();
  private readonly codesI = new DistinctCodes();
  private readonly codesV = new DistinctCodes();
  private readonly liveIds = new Set<string>();
  /** The row's values, filled in for every row (nothing keeps the object). */
  private readonly point: CurvePoint = {
    hostS: 0,
    chargeAh: 0,
    energyWh: 0,
    volts: 0,
    amps: 0,
    celsius: 0,
    loadOn: false,
  };
  private lastId: string | null = null;
  private readonly stepPerCellV: number;
  private rows = 0;
  private ended = false;
  private prev: {
    hostMs: number;
    loadOn: boolean;
    vRaw: number;
    iRaw: number;
    volts: number;
    amps: number;
  } | null = null;
  private nextResumption = 0;
  // Figures set on every row are numbers from the start, NaN for none yet: a field that has
  // held null keeps every number written to it in a new box.
  private firstHostS = Number.NaN;
  private lastHostS = Number.NaN;
  private lastWall: string | null = null;
  private loadedFrames = 0;
  private lost = 0;
  private gaps = 0;
  private rigRestarts = 0;
  private switchOns = 0;
  private firstOnS: number | null = null;
  private lastLoadedV = Number.NaN;
  private minA = Infinity;
  private maxA = -Infinity;
  private readonly restTemps = new RestingTemperature();
  private startC: number | null = null;
  private minC = Infinity;
  private maxC = -Infinity;
  private endC = Number.NaN;
  private liveTotals: { chargeAh: number; energyWh: number } | null = null;
  /** Host ms of the rig's last acknowledgement of the load off, if any. */
  private lastOffAckMs: number | null = null;
  /** Host ms of the last row the run's session took in (the one before it ended). */
  private lastIntegratedMs: number | null = null;

  constructor(
    private readonly manifest: RunManifest,
    private readonly calibration: Calibration | null,
    private readonly o: Omit<RecomputeOptions, 'calibration' | 'onProgress'> = {},
  ) {
    this.chain = new AnalogChain(manifest.rig.profile);
    this.frames = new FrameMeasure(this.chain, applyCalibration(calibration));
    this.plausibility = new Plausibility(
      plausibilityFor({
        maxRestVPerCell: manifest.chemistry.profile.max_rest_V_per_cell.value,
        cells: manifest.cells,
        ampsPerCount: this.chain.ampsPerCount,
      }),
    );
    this.stepPerCellV = o.stepPerCellV ?? 0.05;
    this.steps = new VoltageSteps({
      stepPerCellV: this.stepPerCellV,
      cells: manifest.cells,
      cutoffPerCellV: manifest.cutoff_per_cell_V,
    });
  }

  /** Feed every event first: a resumed run starts new integration segments where it resumed. */
  event(e: Parameters<EventDigest['add']>[0]): void {
    this.digest.add(e);
    if (
      e.event === 'rig_ack' &&
      e.command === 'LOAD' &&
      Number(e.args[0]) === this.manifest.channel &&
      e.args[1] === '0'
    )
      this.lastOffAckMs = Math.round(e.host_s * 1000);
  }

  /** One row, read and not kept: the caller may reuse the record. */
  private plausible(
    state: string,
    atMs: number,
    volts: number,
    amps: number,
    loadOn: boolean,
  ): boolean {
    if (!loadOn) this.plausibility.observeOff(amps);
    if (!CHECKED_STATES.has(state)) return true;
    const x = this.plausibleIn;
    x.atMs = atMs;
    x.volts = volts;
    x.amps = amps;
    x.loadOn = loadOn;
    return this.plausibility.check(x).plausible;
  }

  sample(s: Readonly<SampleRecord>): void {
    this.rows++;
    if (s.calibrationId !== this.lastId) {
      this.lastId = s.calibrationId;
      this.liveIds.add(s.calibrationId);
    }
    const v = this.frames.values(s, this.values);
    // Logged to the millisecond: whole milliseconds, as the daemon integrated them.
    const hostMs = Math.round(s.hostS * 1000);
    const prev = this.prev;
    const fresh = prev === null || this.resumedBefore(hostMs);
    const t = this.stamp;
    t.runMs = hostMs;
    this.frames.restamp(s, t);
    if (t.rigRestart) this.rigRestarts++;
    this.lost += t.lost;
    if (t.gap) this.gaps++;
    // The row's values as the measures, the curve and the resistance tracker take them: in one
    // object filled in place rather than as arguments (doubles passed to a call are boxed).
    const point = this.point;
    point.hostS = s.hostS;
    point.volts = v.volts;
    point.amps = v.amps;
    point.celsius = v.celsius;
    point.loadOn = v.loadOn;
    const integrate = this.integrates(s, prev);
    if (integrate) this.lastIntegratedMs = hostMs;
    if (integrate && !this.plausible(s.state, hostMs, v.volts, v.amps, v.loadOn)) {
      // Left out as the live run left it: its time held at the last trusted reading.
      this.integrator.hold(t.dtMs, v.loadOn);
    } else if (integrate) {
      this.integrator.add(t.dtMs, v.volts, v.amps, v.loadOn, t.gap);
      this.frames.integrateNominal(v, t.dtMs);
      this.followLiveTotals(s);
      this.measure(s, prev, point, fresh);
      this.lastWall = s.wallTime;
    }
    point.chargeAh = this.integrator.chargeAh;
    point.energyWh = this.integrator.energyWh;
    this.resistance.add(point);
    this.curve.add(point);
    this.keepPrev(s, hostMs, v);
    if (this.rows === 1) this.firstHostS = s.hostS;
    this.lastHostS = s.hostS;
  }

  /**
   * A new segment where the daemon resumed the run (or the host clock went back): as in the
   * daemon, the measure starts afresh, nothing is bridged across the time it was down, and its
   * own estimate of what flowed meanwhile is added.
   */
  private resumedBefore(hostMs: number): boolean {
    const prev = this.prev!;
    const resumptions = this.digest.result().resumptions;
    let unloggedS = 0;
    let resumed = hostMs < prev.hostMs;
    while (
      this.nextResumption < resumptions.length &&
      resumptions[this.nextResumption]!.atS * 1000 <= hostMs
    ) {
      const r = resumptions[this.nextResumption++]!;
      if (r.atS * 1000 >= prev.hostMs) {
        resumed = true;
        unloggedS += r.unloggedS;
      }
    }
    if (!resumed) return false;
    const integ = this.integrator;
    integ.restore({
      chargeAh: integ.chargeAh,
      energyWh: integ.energyWh,
      onMs: integ.onMs,
      bridgedAh: integ.bridgedAh,
    });
    if (unloggedS > 0 && !this.ended) {
      integ.addUnlogged(unloggedS * 1000, prev.volts, prev.amps);
      this.frames.addUnloggedNominal(this.chain.amps(prev.iRaw), unloggedS * 1000);
    }
    this.frames.newSegment();
    return true;
  }

  /**
   * The row that shows the end was integrated only when its frame ended the run; a run ended by
   * the rig's acknowledgement between frames left it out, and its logged totals did not move.
   */
  private integrates(s: Readonly<SampleRecord>, prev: RunRecompute['prev']): boolean {
    if (this.ended) return false;
    if (s.state !== 'ended') return true;
    this.ended = true;
    const live = this.liveTotals;
    return (
      live === null || !prev?.loadOn || s.chargeAh !== live.chargeAh || s.energyWh !== live.energyWh
    );
  }

  private followLiveTotals(s: Readonly<SampleRecord>): void {
    if (this.liveTotals === null) this.liveTotals = { chargeAh: s.chargeAh, energyWh: s.energyWh };
    else {
      this.liveTotals.chargeAh = s.chargeAh;
      this.liveTotals.energyWh = s.energyWh;
    }
  }

  /** One object for the whole run, updated in place: a new one per row is garbage per row. */
  private keepPrev(s: Readonly<SampleRecord>, hostMs: number, v: Readonly<FrameValues>): void {
    const prev = this.prev;
    if (prev === null) {
      this.prev = {
        hostMs,
        loadOn: v.loadOn,
        vRaw: s.vRaw,
        iRaw: s.iRaw,
        volts: v.volts,
        amps: v.amps,
      };
      return;
    }
    prev.hostMs = hostMs;
    prev.loadOn = v.loadOn;
    prev.vRaw = s.vRaw;
    prev.iRaw = s.iRaw;
    prev.volts = v.volts;
    prev.amps = v.amps;
  }

  private measure(
    s: Readonly<SampleRecord>,
    prev: RunRecompute['prev'],
    point: Readonly<CurvePoint>,
    fresh: boolean,
  ): void {
    const { volts, amps, celsius, loadOn } = point;
    const onS = this.integrator.onMs / 1000;
    if (Number.isFinite(celsius)) {
      this.endC = celsius;
      this.minC = Math.min(this.minC, celsius);
      this.maxC = Math.max(this.maxC, celsius);
      if (this.firstOnS === null && !loadOn) this.restTemps.add(celsius);
    }
    if (!loadOn) return;
    if (fresh || !prev!.loadOn) {
      this.switchOns++;
      if (this.firstOnS === null) {
        this.firstOnS = s.hostS;
        this.startC = this.restTemps.mean() ?? (Number.isFinite(celsius) ? celsius : null);
      }
    } else if (
      Math.abs(amps - prev!.amps) <=
      LEVEL_CHANGE * Math.max(Math.abs(amps), Math.abs(prev!.amps))
    ) {
      this.noiseI.add(prev!.iRaw, s.iRaw);
      this.noiseV.add(prev!.vRaw, s.vRaw);
    }
    this.loadedFrames++;
    this.lastLoadedV = volts;
    if (onS >= SETTLE_S) {
      this.minA = Math.min(this.minA, amps);
      this.maxA = Math.max(this.maxA, amps);
    }
    if (this.codesI.size < MAX_CODES) this.codesI.add(s.iRaw);
    if (this.codesV.size < MAX_CODES) this.codesV.add(s.vRaw);
    this.steps.add(volts, true, this.integrator.chargeAh, this.integrator.energyWh, onS);
  }

  finish(ctx: {
    folder: string;
    original: RunResult | null;
    checkpoint: Checkpoint | null;
    calibrationFile: string | null;
    cutLines: number;
    notes: string[];
  }): RunFigures {
    const m = this.manifest;
    const cal = this.calibration;
    const ev = this.digest.result();
    const notes = [...ctx.notes];
    const integ = this.integrator;
    const hours = integ.onMs / 3_600_000;
    const avgA = hours > 0 ? integ.chargeAh / hours : null;
    const cutoffV = ev.cutoffChanges.at(-1)?.cutoffV ?? m.cutoff_V;
    const rejected =
      ctx.original?.frames_rejected ??
      Math.max(ctx.checkpoint?.frames_rejected ?? 0, ev.rejectedLines);
    const errorPpm = this.frames.rigClockErrorPpm();
    const resistance = this.resistance.result();
    const end =
      ev.end ??
      (ctx.original
        ? {
            reason: ctx.original.end_reason,
            detail: ctx.original.end_detail ?? '',
            loadOffConfirmed: ctx.original.load_off_confirmed ?? true,
          }
        : null);

    this.offAfterLastRow(end);
    const base = this.baseResult(end, cutoffV, rejected, errorPpm, resistance);
    const noise = this.noise(cal);
    const uncertainty = this.uncertainty(cal, base.mean_voltage_V, noise);

    const { verdict, minA, maxA } = this.verdict(cutoffV, avgA, end?.reason ?? 'interrupted');
    const steps = this.steps.rows();
    const midpoint =
      integ.chargeAh > 0 ? loadedVoltageAtCharge(this.curve.buckets, integ.chargeAh / 2) : null;

    const liveIds = [...this.liveIds];
    const appliedId = cal?.id ?? 'none';
    this.addNotes(notes, { liveIds, appliedId, cutLines: ctx.cutLines, ended: end !== null });
    const result = this.recomputedResult(base, end !== null, {
      uncertainty,
      verdict,
      avgA,
      steps,
      midpoint,
      calibrationFile: ctx.calibrationFile,
      cutLines: ctx.cutLines,
    });
    return {
      folder: ctx.folder,
      manifest: m,
      result,
      original: ctx.original,
      calibration: {
        applied: cal,
        id: appliedId,
        own: appliedId === m.calibration.id,
        file: ctx.calibrationFile,
        liveIds,
      },
      steps,
      stepPerCellV: this.stepPerCellV,
      resistance,
      verdict,
      ...this.measures(rejected, errorPpm),
      current: { minA, maxA, noiseA: noise.noiseA },
      voltageNoiseV: noise.noiseV,
      loadSwitchOns: this.switchOns,
      liveTotals: this.liveTotals,
      curve: this.curve.buckets,
      events: ev,
      cautions: m.chemistry.profile.cautions,
      notes,
    };
  }

  /**
   * A run ended by the rig's acknowledgement of the load off, after the last row (which showed
   * the load on): as in the daemon, the switch fell between that row and the acknowledgement.
   */
  private offAfterLastRow(end: RunEnd | null): void {
    const ack = this.lastOffAckMs;
    const last = this.lastIntegratedMs;
    if (end?.loadOffConfirmed && ack !== null && last !== null && ack >= last)
      this.integrator.offAfterLast(ack - last);
  }

  /** The daemon's keys, and those only a recompute gives. */
  private recomputedResult(
    base: RunResult,
    ended: boolean,
    x: {
      uncertainty: RecomputedResult['uncertainty'];
      verdict: Verdict | null;
      avgA: number | null;
      steps: VoltageStepRow[];
      midpoint: number | null;
      calibrationFile: string | null;
      cutLines: number;
    },
  ): RecomputedResult {
    const { uncertainty, verdict, avgA, steps, midpoint } = x;
    const ratedAh = this.o.ratedAh ?? null;
    const integ = this.integrator;
    return {
      ...base,
      end_reason: ended ? base.end_reason : 'interrupted',
      uncertainty,
      midpoint_voltage_V: rn(midpoint, 5),
      average_current_A: rn(avgA, 6),
      rated_Ah: ratedAh,
      c_rate: ratedAh !== null && avgA !== null ? rn(avgA / ratedAh, 4) : null,
      percent_of_rated: ratedAh !== null ? rn((integ.chargeAh / ratedAh) * 100, 2) : null,
      capacity_by_voltage: steps.map((s) => ({
        V_per_cell: s.perCellV,
        V: s.totalV,
        capacity_Ah: rn(s.chargeAh, 6),
        energy_Wh: rn(s.energyWh, 6),
        load_on_s: rn(s.loadOnS, 3),
      })),
      verdict: verdictKeys(verdict),
      recomputed: {
        cellvigil_version: packageVersion(),
        calibration_file: x.calibrationFile,
        from_rows: this.rows,
        cut_lines: x.cutLines,
      },
    };
  }

  /** The daemon's keys of result.json, built as the daemon builds them. */
  private baseResult(
    end: RunEnd | null,
    cutoffV: number,
    rejected: number,
    errorPpm: number | null,
    resistance: ResistanceSummary,
  ): RunResult {
    const m = this.manifest;
    const cal = this.calibration;
    const integ = this.integrator;
    const on = resistance.switch_on?.first ?? null;
    return buildResult({
      end: end && end.reason !== 'interrupted' ? (end.reason as SessionEnd) : 'stopped',
      detail:
        end?.detail ??
        'interrupted: the run folder has no result and its event log no end; figures are from the rows written',
      loadOffConfirmed: end?.loadOffConfirmed ?? false,
      chargeAh: integ.chargeAh,
      energyWh: integ.energyWh,
      onMs: integ.onMs,
      bridgedAh: integ.bridgedAh,
      nominalAh: this.frames.nominalAh,
      loadedSamples: this.loadedFrames,
      lastLoadedV: Number.isNaN(this.lastLoadedV) ? null : this.lastLoadedV,
      cutoffV,
      counters: { accepted: this.rows, rejected, lost: this.lost },
      implausibleFrames: this.plausibility.implausibleFrames,
      rigClockErrorPpm: errorPpm,
      calibration: cal,
      calibrationId: cal?.id ?? 'none',
      ampsPerCount: this.chain.ampsPerCount,
      voltsPerCount: this.chain.voltsPerCount,
      chemistry: m.chemistry.id,
      cells: m.cells,
      openCircuitV: on?.uBeforeV ?? null,
      dcResistanceOhm: on?.ohm ?? null,
      gaps: this.gaps,
      startedWallMs: Date.parse(m.started_wall),
      endedWallMs: this.lastWall !== null ? Date.parse(this.lastWall) : Date.parse(m.started_wall),
      schedule: m.schedule?.description ?? null,
      loadSwitches: integ.switches,
    });
  }

  private measures(
    rejected: number,
    errorPpm: number | null,
  ): Pick<RunFigures, 'frames' | 'clock' | 'temperature'> {
    const spanS = this.rows > 0 ? this.lastHostS - this.firstHostS : 0;
    const startC = this.startC;
    return {
      frames: {
        accepted: this.rows,
        rejected,
        lost: this.lost,
        gaps: this.gaps,
        rigRestarts: this.rigRestarts,
        loadedFrames: this.loadedFrames,
        meanIntervalS: this.rows > 1 ? spanS / (this.rows - 1) : null,
      },
      clock: {
        errorPpm: rn(errorPpm, 0),
        warning: errorPpm !== null && Math.abs(errorPpm) > CLOCK_WARN_PPM,
      },
      temperature: {
        startC,
        minC: Number.isFinite(this.minC) ? this.minC : null,
        maxC: Number.isFinite(this.maxC) ? this.maxC : null,
        endC: Number.isNaN(this.endC) ? null : this.endC,
      },
    };
  }

  /** Noise from raw counts, in corrected units through the chain and the calibration's gain. */
  private noise(cal: Calibration | null): {
    noiseA: number | null;
    noiseV: number | null;
    quantisationSamples: { current: number; voltage: number };
  } {
    const sdI = this.noiseI.sd();
    const sdV = this.noiseV.sd();
    const gainI = cal?.current?.fit.gain ?? 1;
    const gainV = cal?.voltage?.fit.gain ?? 1;
    const noiseA = sdI === null ? null : sdI * this.chain.ampsPerCount * gainI;
    const noiseV = sdV === null ? null : sdV * this.chain.voltsPerCount * gainV;
    // Noise below half a count does not dither the ADC: only distinct codes round independently.
    const quantisationSamples = {
      current: sdI !== null && sdI >= 0.5 ? this.loadedFrames : this.codesI.size,
      voltage: sdV !== null && sdV >= 0.5 ? this.loadedFrames : this.codesV.size,
    };
    return { noiseA, noiseV, quantisationSamples };
  }

  private uncertainty(
    cal: Calibration | null,
    meanV: number | null,
    n: ReturnType<RunRecompute['noise']>,
  ): RecomputedResult['uncertainty'] {
    const integ = this.integrator;
    const { noiseA, noiseV, quantisationSamples } = n;
    return runUncertainty({
      chargeAh: integ.chargeAh,
      energyWh: integ.energyWh,
      nominalAh: this.frames.nominalAh,
      onS: integ.onMs / 1000,
      samples: this.loadedFrames,
      ampsPerCount: this.chain.ampsPerCount,
      voltsPerCount: this.chain.voltsPerCount,
      meanVoltageV: meanV ?? 0,
      bridgedAh: integ.bridgedAh,
      calibration: cal,
      ...(noiseA !== null ? { currentNoiseA: noiseA } : {}),
      ...(noiseV !== null ? { voltageNoiseV: noiseV } : {}),
      quantisationSamples,
      loadSwitches: integ.switches,
    });
  }

  private verdict(
    cutoffV: number,
    avgA: number | null,
    endReason: string,
  ): { verdict: Verdict | null; minA: number | null; maxA: number | null } {
    const m = this.manifest;
    const integ = this.integrator;
    const ratedAh = this.o.ratedAh ?? null;
    const startC = this.startC;
    const minA = Number.isFinite(this.minA) ? this.minA : null;
    const maxA = Number.isFinite(this.maxA) ? this.maxA : null;
    const verdict = ratedCapacityVerdict({
      chemistryId: m.chemistry.id,
      cells: m.cells,
      cutoffPerCellV: cutoffV / m.cells,
      ratedAh,
      averageCurrentA: avgA ?? 0,
      minCurrentA: minA ?? avgA ?? 0,
      maxCurrentA: maxA ?? avgA ?? 0,
      durationS: integ.onMs / 1000,
      endReason,
      startTemperatureC: startC,
      loadSwitchOns: this.switchOns,
      ...(this.o.rateTolerance !== undefined ? { rateTolerance: this.o.rateTolerance } : {}),
    });
    return { verdict, minA, maxA };
  }

  private addNotes(
    notes: string[],
    x: { liveIds: string[]; appliedId: string; cutLines: number; ended: boolean },
  ): void {
    const { liveIds, appliedId } = x;
    const integ = this.integrator;
    const ev = this.digest.result();
    if (liveIds.some((id) => id !== appliedId)) {
      notes.push(
        `The live run made its rows with calibration ${liveIds.join(', ')}; this recompute applies ${appliedId} to every row.`,
      );
    } else if (this.liveTotals && integ.chargeAh > 0) {
      const d = integ.chargeAh / this.liveTotals.chargeAh - 1;
      notes.push(
        `Same calibration as the live run: the recomputed capacity differs from the live total in the log by ${(d * 100).toExponential(1)} %.`,
      );
    }
    if (x.cutLines > 0)
      notes.push(
        `${x.cutLines} line${x.cutLines > 1 ? 's were' : ' was'} cut off by the interruption of the run and left out.`,
      );
    const resumed = ev.resumptions.length;
    if (resumed > 0) {
      const dark = ev.resumptions.reduce((t, r) => t + r.unloggedS, 0);
      notes.push(
        `The run was resumed ${resumed} time${resumed > 1 ? 's' : ''}; nothing is interpolated across the time it was down${dark > 0 ? `, and ${dark.toFixed(1)} s of load-on time with nothing logged are counted at the last logged current, in full as doubt in the budget` : ''}.`,
      );
    }
    if (!x.ended)
      notes.push('The run was interrupted: it has no result.json and its event log no end.');
  }
}

/** Recomputes a run folder, streaming its events and samples. */
export async function recomputeRun(run: RunFolder, o: RecomputeOptions = {}): Promise<RunFigures> {
  const calibration =
    o.calibration === undefined ? run.manifest.calibration.content : o.calibration;
  const core = new RunRecompute(run.manifest, calibration, o);
  let cutLines = 0;
  const notes = [...run.notes];
  const onCutLine = (c: { file: string; line: number }): void => {
    cutLines++;
    notes.push(
      `${c.file} line ${c.line} was cut off (the run was interrupted while writing it) and is left out.`,
    );
  };
  for await (const e of readRunEvents(run, { onCutLine })) core.event(e);
  const total = run.sampleFiles.reduce((t, f) => t + f.bytes, 0);
  let done = 0;
  const onBytes = o.onProgress
    ? (n: number): void => {
        done += n;
        o.onProgress!(done, total);
      }
    : undefined;
  // A program run's segments: the same rows through the live run's accounting.
  const program = run.manifest.program
    ? new ProgramRecompute(run.manifest, calibration, await readSegments(run.dir))
    : null;
  await forEachRunSample(run, { onCutLine, ...(onBytes ? { onBytes } : {}) }, (s) => {
    core.sample(s);
    program?.sample(s);
  });
  const calibrationFile =
    o.calibration === undefined ? run.manifest.calibration.file : (o.calibrationFile ?? null);
  const figures = core.finish({
    folder: run.dir,
    original: run.result,
    checkpoint: run.checkpoint,
    calibrationFile,
    cutLines,
    notes,
  });
  if (program === null || run.manifest.program === undefined) return figures;
  const segments = program.finish(run.result === null);
  const result = withProgram(figures.result, run.manifest.program.name, segments);
  const ratedAh = o.ratedAh ?? run.manifest.program.plan.ratedAh;
  const verdict = programVerdict({
    manifest: run.manifest,
    result,
    conditions: (i) => program.conditionsOf(i),
    ratedAh,
    ...(o.rateTolerance !== undefined ? { rateTolerance: o.rateTolerance } : {}),
  });
  const mean = checkedDischarge(result)?.mean_current_A ?? null;
  figures.verdict = verdict;
  figures.result = {
    ...result,
    // The figures of the discharge the top-level ones come from, not of every row of the run.
    average_current_A: mean,
    rated_Ah: ratedAh,
    c_rate: ratedAh !== null && mean !== null ? rn(mean / ratedAh, 4) : null,
    percent_of_rated: ratedAh !== null ? rn((result.capacity_Ah / ratedAh) * 100, 2) : null,
    verdict: verdictKeys(verdict),
  };
  return figures;
}
