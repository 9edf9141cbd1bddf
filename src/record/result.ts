/**
 * result.json: the figures of a finished run. Built here from the run's totals (by the daemon and
 * by the report's recompute alike), written by the run's recorder, read back with its schema.
 */
import { join } from 'node:path';
import { Ajv, type SchemaObject } from 'ajv';
import type { Calibration } from '../calibration/calibration.js';
import type { SwitchWindows } from '../session/integrator.js';
import { SAFETY_END_REASONS, type EndReason, type SessionEnd } from '../session/session-types.js';
import { runUncertainty, type FigureUncertainty } from '../results/uncertainty.js';
import { writeJsonAtomic } from '../sinks/atomic-json.js';
import { parseChecked, readOptional } from './json-file.js';
import type { SegmentFigures } from '../program/segment-figures.js';

/** result.json (docs/run-folder.md lists every key). */
export interface RunResult {
  capacity_Ah: number;
  energy_Wh: number;
  duration_s: number;
  /** `interrupted` is written by `report` for a run that never finished. */
  end_reason: EndReason | 'refused' | 'interrupted';
  mean_voltage_V: number | null;
  end_voltage_V: number | null;
  cutoff_V: number;
  frames_accepted: number;
  frames_rejected: number;
  frames_lost: number;
  /** Frames whose readings could not be true: not integrated (docs/safety.md). */
  frames_implausible: number;
  rig_clock_error_ppm: number | null;
  calibration_id: string;
  uncertainty: { capacity_Ah: FigureUncertainty; energy_Wh: FigureUncertainty };
  end_detail: string;
  load_off_confirmed: boolean;
  chemistry: string;
  cells: number;
  open_circuit_V: number | null;
  dc_resistance_ohm: number | null;
  gaps: number;
  bridged_Ah: number;
  rig_clock_warning: boolean;
  started_wall: string;
  ended_wall: string;
  /** The discharge schedule, or null for a continuous discharge. */
  schedule: string | null;
  /** Load-on hours to the end point: a scheduled test's service output (null unless it reached the cutoff). */
  service_output_h: number | null;
  /** What is written on the cell, as the user gave it; null when none was given. */
  cell_id: string | null;
  /** Program runs only (docs/programs.md): the program's name, each segment's and each cycle's figures. */
  program?: string;
  segments?: SegmentFigures[];
  cycles?: CycleFigures[];
  cycle_trend?: CycleTrendFigures | null;
}

export type { SegmentFigures } from '../program/segment-figures.js';

/** One full discharge of a program (it reached its cutoff): one cycle's capacity. */
export interface CycleFigures {
  /** The repeat pass, or the count of full discharges when the program has no repeat. */
  cycle: number;
  /** Index of the discharge segment. */
  segment: number;
  capacity_Ah: number;
  energy_Wh: number;
  mean_current_A: number | null;
  uncertainty: { capacity_Ah: FigureUncertainty; energy_Wh: FigureUncertainty };
  /** This cycle's capacity over the first's. */
  of_first: number;
}

/** The cycle-to-cycle trend (least squares; null members under two cycles). */
export interface CycleTrendFigures {
  slope_Ah_per_cycle: number | null;
  slope_share_per_cycle: number | null;
  change_Ah: number | null;
  change_beyond_uncertainty: boolean | null;
}

/** A rig clock off by more than this is worth a warning (its own timing would mislead). */
export const CLOCK_WARN_PPM = 10_000;

export interface ResultInput {
  cellId?: string | null;
  end: SessionEnd;
  detail: string;
  loadOffConfirmed: boolean;
  chargeAh: number;
  energyWh: number;
  onMs: number;
  bridgedAh: number;
  nominalAh: number;
  loadedSamples: number;
  lastLoadedV: number | null;
  cutoffV: number;
  counters: { accepted: number; rejected: number; lost: number };
  /** Frames the session left out as implausible. @default 0 */
  implausibleFrames?: number;
  rigClockErrorPpm: number | null;
  calibration: Calibration | null;
  calibrationId: string;
  ampsPerCount: number;
  voltsPerCount: number;
  chemistry: string;
  cells: number;
  openCircuitV: number | null;
  dcResistanceOhm: number | null;
  gaps: number;
  startedWallMs: number;
  endedWallMs: number;
  /** The schedule's description; absent or null for a continuous discharge. */
  schedule?: string | null;
  /** The integrator's switch windows, for the uncertainty budget. */
  loadSwitches?: SwitchWindows;
}

const r = (x: number, digits: number): number => Number(x.toFixed(digits));
const rn = (x: number | null, digits: number): number | null =>
  x === null || !Number.isFinite(x) ? null : r(x, digits);

export function buildResult(x: ResultInput): RunResult {
  const meanV = x.chargeAh > 0 ? x.energyWh / x.chargeAh : null;
  const uncertainty = runUncertainty({
    chargeAh: x.chargeAh,
    energyWh: x.energyWh,
    nominalAh: x.nominalAh,
    onS: x.onMs / 1000,
    samples: x.loadedSamples,
    ampsPerCount: x.ampsPerCount,
    voltsPerCount: x.voltsPerCount,
    meanVoltageV: meanV ?? 0,
    bridgedAh: x.bridgedAh,
    calibration: x.calibration,
    ...(x.loadSwitches ? { loadSwitches: x.loadSwitches } : {}),
  });
  return {
    capacity_Ah: r(x.chargeAh, 6),
    energy_Wh: r(x.energyWh, 6),
    duration_s: r(x.onMs / 1000, 3),
    end_reason: x.end,
    mean_voltage_V: rn(meanV, 5),
    end_voltage_V: rn(x.lastLoadedV, 5),
    cutoff_V: x.cutoffV,
    frames_accepted: x.counters.accepted,
    frames_rejected: x.counters.rejected,
    frames_lost: x.counters.lost,
    frames_implausible: x.implausibleFrames ?? 0,
    rig_clock_error_ppm: rn(x.rigClockErrorPpm, 0),
    calibration_id: x.calibrationId,
    uncertainty,
    end_detail: x.detail,
    load_off_confirmed: x.loadOffConfirmed,
    chemistry: x.chemistry,
    cells: x.cells,
    open_circuit_V: rn(x.openCircuitV, 5),
    dc_resistance_ohm: rn(x.dcResistanceOhm, 5),
    gaps: x.gaps,
    bridged_Ah: r(x.bridgedAh, 6),
    rig_clock_warning: x.rigClockErrorPpm !== null && Math.abs(x.rigClockErrorPpm) > CLOCK_WARN_PPM,
    started_wall: new Date(x.startedWallMs).toISOString(),
    ended_wall: new Date(x.endedWallMs).toISOString(),
    schedule: x.schedule ?? null,
    cell_id: x.cellId ?? null,
    service_output_h:
      x.schedule !== null && x.schedule !== undefined && x.end === 'cutoff'
        ? r(x.onMs / 3_600_000, 6)
        : null,
  };
}

/**
 * Exit codes (README): 0 normal end, 2 nothing switched on (configuration, precheck), 3 safety
 * limit. A refusal before the rig sent a single valid frame is a failure of the set-up, not of
 * the configuration: 1.
 */
export function exitCodeFor(end: SessionEnd, rigNeverSpoke: boolean): number {
  switch (end) {
    case 'cutoff':
    case 'stopped':
    case 'program_complete':
      return 0;
    case 'over_temperature':
    case 'link_lost':
    case 'fault':
    case 'implausible_reading':
    case 'open_load':
    case 'charge_timeout':
    case 'charge_fault':
      return 3;
    case 'refused':
      return rigNeverSpoke ? 1 : 2;
  }
}

const END_REASONS: ReadonlySet<string> = new Set<SessionEnd>([
  'cutoff',
  'stopped',
  'program_complete',
  'refused',
  ...SAFETY_END_REASONS,
]);

/** The exit code a result stands for (a result another program sent: anything unknown is 1). */
export function exitCodeForResult(result: Record<string, unknown>): number {
  const reason = result['end_reason'];
  if (typeof reason !== 'string' || !END_REASONS.has(reason)) return 1;
  return exitCodeFor(reason as SessionEnd, result['frames_accepted'] === 0);
}

export const RESULT_FILE = 'result.json';

const num = { type: 'number' };
const count = { type: 'integer', minimum: 0 };
const figure = {
  type: 'object',
  required: ['standard', 'expanded', 'k'],
  properties: {
    standard: num,
    expanded: num,
    k: num,
    basis: { type: 'string' },
    terms: { type: 'array' },
  },
};

// Open: later versions may add keys; the keys a recompute reads must have their types.
const SCHEMA: SchemaObject = {
  type: 'object',
  required: ['capacity_Ah', 'energy_Wh', 'duration_s', 'end_reason', 'calibration_id'],
  properties: {
    capacity_Ah: num,
    energy_Wh: num,
    duration_s: num,
    end_reason: { type: 'string' },
    mean_voltage_V: { type: ['number', 'null'] },
    end_voltage_V: { type: ['number', 'null'] },
    cutoff_V: num,
    frames_accepted: count,
    frames_rejected: count,
    frames_lost: count,
    rig_clock_error_ppm: { type: ['number', 'null'] },
    calibration_id: { type: 'string' },
    uncertainty: { type: 'object', properties: { capacity_Ah: figure, energy_Wh: figure } },
    program: { type: 'string' },
    segments: {
      type: 'array',
      items: {
        type: 'object',
        required: ['index', 'kind', 'cycle', 'charge_Ah', 'energy_Wh', 'end_reason'],
        properties: {
          index: count,
          kind: { enum: ['rest', 'discharge', 'charge'] },
          cycle: { type: ['integer', 'null'] },
          charge_Ah: num,
          energy_Wh: num,
          end_reason: { type: 'string' },
          uncertainty: { type: 'object', properties: { charge_Ah: figure, energy_Wh: figure } },
        },
      },
    },
    cycles: {
      type: 'array',
      items: {
        type: 'object',
        required: ['cycle', 'segment', 'capacity_Ah'],
        properties: {
          cycle: { type: 'integer', minimum: 1 },
          segment: count,
          capacity_Ah: num,
          energy_Wh: num,
          uncertainty: { type: 'object', properties: { capacity_Ah: figure, energy_Wh: figure } },
        },
      },
    },
    cycle_trend: { type: ['object', 'null'] },
  },
};

const validate = new Ajv({ allErrors: true, strict: true, strictRequired: false }).compile(SCHEMA);

/** Writes result.json (or a recompute's result-<calibration id>.json) at `path`, atomically. */
export function writeResult(path: string, result: RunResult): Promise<void> {
  return writeJsonAtomic(path, result);
}

export function resultPath(folder: string): string {
  return join(folder, RESULT_FILE);
}

/** result.json, or null when the run has none (it was interrupted). */
export async function readResultFile(path: string): Promise<RunResult | null> {
  const text = await readOptional(path);
  return text === null ? null : parseResult(text, path);
}

/** A result.json's text, from its file or a copy of it (a broker's), checked as the file is. */
export function parseResult(text: string, where: string): RunResult {
  return parseChecked<RunResult>(
    text,
    where,
    validate,
    'Move the damaged file aside; `cellvigil report` then writes a new result.json from the raw counts.',
  );
}
