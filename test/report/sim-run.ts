/**
 * Writes a run folder by the contract of docs/run-folder.md from the simulated rig, through the
 * same core the daemon uses (Pipeline, Session, LogFile, EventLog, buildResult), on a virtual
 * clock, and keeps the simulator's truth for the checks.
 */
import { mkdir } from 'node:fs/promises';
import { join } from 'node:path';
import {
  applyCalibration,
  fitQuantity,
  sealCalibration,
  type Calibration,
  type CalibrationPoint,
} from '../../src/calibration/calibration.js';
import { AnalogChain } from '../../src/chain/analog-chain.js';
import type { RigProfile } from '../../src/chain/rig-profile-types.js';
import { findChemistry } from '../../src/chemistry/chemistries.js';
import { loadChemistries } from '../../src/chemistry/chemistry-file.js';
import { checkRestingVoltage, resolveCutoff } from '../../src/chemistry/limits.js';
import { VirtualClock } from '../../src/core/clock.js';
import { encodeCommand } from '../../src/protocol/codec.js';
import { EventLog } from '../../src/record/event-log.js';
import type { RunEvent } from '../../src/record/events.js';
import { Pipeline } from '../../src/run/pipeline.js';
import { buildResult, type RunResult } from '../../src/record/result.js';
import { plausibilityFor } from '../../src/session/plausibility.js';
import { Session } from '../../src/session/session.js';
import type { Action, SessionEnd } from '../../src/session/session-types.js';
import { FrontEnd } from '../../src/sim/front-end.js';
import { mulberry32 } from '../../src/sim/prng.js';
import { buildSimRig, type SimOverrides, type SimScenario } from '../../src/sim/scenarios.js';
import type { SimTruth } from '../../src/sim/sim-rig.js';
import { writeJsonAtomic } from '../../src/sinks/atomic-json.js';
import { LogFile } from '../../src/sinks/log-file.js';
import { formatSampleRow, SAMPLE_HEADER } from '../../src/sinks/sample-row.js';
import { LineBuffer } from '../../src/sources/line-buffer.js';

export const BENCH_PROFILE: RigProfile = {
  name: 'bench rig, 20 mΩ shunt',
  adc: { bits: 12, vref_V: 3.3 },
  voltage: { divider_top_ohm: 10000, divider_bottom_ohm: 10000 },
  current: { shunt_ohm: 0.02, amplifier_gain: 30.3 },
  temperature: { ntc_r25_ohm: 10000, ntc_beta_K: 3950, fixed_ohm: 10000, ntc_position: 'low' },
  frame: { baud: 115200 },
};

/** A demo scenario: a 60 mAh Li-ion cell at about 1.2 A, with the offset and gain errors of a typical board. */
export function demoScenario(over: Partial<SimScenario> = {}): SimScenario {
  return {
    name: 'test-cell',
    description: 'demo cell for report tests',
    cell: {
      chemistry: 'li-ion',
      cells: 1,
      capacity_Ah: 0.06,
      initial_soc: 1,
      internal_ohm_per_cell: 0.05,
    },
    thermal: {
      ambient_C: 22,
      heat_capacity_J_per_K: 20,
      conductance_W_per_K: 0.08,
      load_heat_fraction: 0,
      extra_heat_W: 0,
    },
    load: { load_ohm: 3.0, mosfet_ohm: 0.015 },
    front_end: {
      current_offset_A: 0.03,
      current_gain_error: 0.04,
      voltage_gain_error: 0.004,
      noise_counts: 0.8,
    },
    rig: {
      rig_id: 'simrig-t1',
      firmware: 'sim-1.0',
      clock_error: 0.08,
      frame_period_ms: 100,
      channel: 0,
    },
    faults: { drop_probability: 0.002, garbage_probability: 0.002, burst_frames: 1, seed: 4242 },
    ...over,
  };
}

export interface SimRunOptions {
  dir: string;
  scenario: SimScenario;
  profile?: RigProfile;
  /** The calibration in force during the live run. */
  calibration?: Calibration | null;
  rotateBytes?: number;
  /** Cutoff per cell; the chemistry's default when absent. */
  cutoffPerCell?: number;
  /** Ask for a stop at this host time, s. */
  stopAtS?: number;
  /** Give up (no end) after this much virtual time, s. */
  limitS?: number;
  /** Keep logging rows this long after the run ended (the cell recovering with the load off), s. */
  afterEndS?: number;
  /** Changes to the scenario's rig: clock, faults of the link or of the circuit. */
  overrides?: SimOverrides;
}

export interface SimRun {
  folder: string;
  result: RunResult;
  truth: SimTruth;
}

export async function simulateRun(o: SimRunOptions): Promise<SimRun> {
  const profile = o.profile ?? BENCH_PROFILE;
  const scenario = o.scenario;
  const calibration = o.calibration ?? null;
  await mkdir(o.dir, { recursive: true });
  const startedWall = Date.UTC(2026, 11, 2, 11, 0, 0);
  const clock = new VirtualClock(0, startedWall);
  const rig = buildSimRig(scenario, clock, profile, o.overrides ?? {});
  const chain = new AnalogChain(profile);
  const chemistries = loadChemistries();
  const chemistry = findChemistry(chemistries, scenario.cell.chemistry);
  const cells = scenario.cell.cells;
  const cutoff = resolveCutoff(chemistry, cells, o.cutoffPerCell);
  const channel = scenario.rig.channel;
  const session = new Session({
    channel,
    cutoffV: cutoff.total,
    floorV: chemistry.floor_V_per_cell.value * cells,
    maxTemperatureC: chemistry.max_temperature_C.value,
    maxCurrentA: 0.98 * chain.fullScale().amps,
    plausibility: plausibilityFor({
      maxRestVPerCell: chemistry.max_rest_V_per_cell.value,
      cells,
      ampsPerCount: chain.ampsPerCount,
    }),
    checkRest: (v) => {
      const c = checkRestingVoltage(chemistry, cells, v, cutoff.perCell, chemistries);
      return c.ok ? null : c.error.message;
    },
  });
  const pipeline = new Pipeline({
    channel,
    adcBits: profile.adc.bits,
    converter: chain,
    corrector: applyCalibration(calibration),
    session,
    originMs: 0,
  });
  const samples = new LogFile({
    dir: o.dir,
    name: 'samples-',
    ext: '.csv',
    header: SAMPLE_HEADER,
    rotateBytes: o.rotateBytes ?? 16777216,
  });
  const events = new EventLog(o.dir);
  await writeJsonAtomic(join(o.dir, 'manifest.json'), {
    format: 'cellvigil-run',
    format_version: 1,
    cellvigil_version: '0.1.0',
    node_version: process.version,
    label: scenario.name,
    started_wall: new Date(startedWall).toISOString(),
    source: {
      kind: 'sim',
      description: `simulated rig, scenario ${scenario.name}`,
      scenario: scenario.name,
      speed: 1,
    },
    channel,
    rig: { file: null, profile },
    calibration: { file: null, id: calibration?.id ?? 'none', content: calibration },
    chemistry: { id: chemistry.id, profile: chemistry },
    cells,
    cutoff_V: cutoff.total,
    cutoff_per_cell_V: cutoff.perCell,
    cutoff_source: cutoff.source,
    floor_V: chemistry.floor_V_per_cell.value * cells,
    limits: {
      max_temperature_C: chemistry.max_temperature_C.value,
      max_current_A: 0.98 * chain.fullScale().amps,
    },
    samples: { prefix: 'samples-', rotate_bytes: o.rotateBytes ?? 16777216 },
  });

  const hostS = (): number => clock.now() / 1000;
  const log = (ev: RunEvent): void => void events.write(hostS(), clock.wallNow(), ev);
  let end: { reason: string; detail: string; confirmed: boolean; atMs: number } | null = null;
  const afterEndMs = (o.afterEndS ?? 0) * 1000;
  let loaded = 0;
  let gaps = 0;
  const dispatch = (actions: Action[]): void => {
    for (const a of actions) {
      if (a.type === 'send') {
        const line = encodeCommand(a.command);
        clock.setTimer(() => rig.receive(line), 2);
        if (a.command.command !== 'BEAT')
          log({ event: 'command', line: line.trim(), queued: true });
      } else if (a.type === 'event') {
        log({ event: a.name, ...a.detail } as RunEvent);
      } else if (!end) {
        end = {
          reason: a.reason,
          detail: a.detail,
          confirmed: a.loadOffConfirmed,
          atMs: clock.now(),
        };
      }
    }
  };
  const lines = new LineBuffer(
    256,
    (text) => {
      if (end && clock.now() > end.atMs + afterEndMs) return;
      const out = pipeline.line(text, clock.now(), clock.wallNow());
      if (out.kind === 'sample') {
        samples.append(formatSampleRow(out.row));
        if (session.loadOn) loaded++;
        if (out.gap) gaps++;
        if (out.lost > 0) log({ event: 'frames_lost', count: out.lost, seq: out.row.seq });
        dispatch(out.actions);
      } else if (out.kind === 'rejected') {
        events.rejected(hostS(), clock.wallNow(), out.reason, out.detail, text);
      } else if (out.kind === 'message') {
        if (out.event) log(out.event);
        dispatch(out.actions);
      }
    },
    () => undefined,
  );
  log({
    event: 'run_started',
    source: 'sim',
    chemistry: chemistry.id,
    cells,
    cutoff_V: cutoff.total,
    version: '0.1.0',
  });
  log({ event: 'cautions', lines: chemistry.cautions });
  rig.start((chunk) => lines.push(chunk));
  clock.setTimer(() => dispatch(session.tick(clock.now())), 100, true);
  dispatch(session.begin(clock.now()));
  const limitMs = (o.limitS ?? 6 * 3600) * 1000;
  let stopAsked = false;
  const running = (): boolean =>
    end === null ? clock.now() < limitMs : clock.now() <= end.atMs + afterEndMs;
  while (running()) {
    clock.advance(1000);
    if (o.stopAtS !== undefined && !stopAsked && clock.now() >= o.stopAtS * 1000) {
      stopAsked = true;
      dispatch(session.requestStop(clock.now(), 'test'));
    }
    if (clock.now() % 60_000 === 0) await Promise.all([samples.flush(), events.flush()]);
  }
  rig.stop();
  const e = end as { reason: string; detail: string; confirmed: boolean; atMs: number } | null;
  if (!e) throw new Error('the simulated run did not end within its time limit');
  const result = buildResult({
    end: e.reason as SessionEnd,
    detail: e.detail,
    loadOffConfirmed: e.confirmed,
    chargeAh: session.integrator.chargeAh,
    energyWh: session.integrator.energyWh,
    onMs: session.integrator.onMs,
    bridgedAh: session.integrator.bridgedAh,
    nominalAh: pipeline.nominalAh,
    loadedSamples: loaded,
    lastLoadedV: session.lastLoadedV,
    cutoffV: session.cutoffV,
    counters: pipeline.counters,
    implausibleFrames: session.plausibility.implausibleFrames,
    rigClockErrorPpm: pipeline.rigClockErrorPpm(),
    calibration,
    calibrationId: pipeline.calibrationId,
    ampsPerCount: chain.ampsPerCount,
    voltsPerCount: chain.voltsPerCount,
    chemistry: chemistry.id,
    cells,
    openCircuitV: session.openCircuitV,
    dcResistanceOhm: session.dcResistanceOhm,
    gaps,
    startedWallMs: startedWall,
    endedWallMs: clock.wallNow(),
    schedule: null,
  });
  events.summarise(hostS(), clock.wallNow());
  events.write(hostS(), clock.wallNow(), {
    event: 'run_ended',
    end_reason: e.reason,
    detail: e.detail,
    load_off_confirmed: e.confirmed,
  });
  await Promise.all([samples.close(), events.close()]);
  await writeJsonAtomic(join(o.dir, 'result.json'), result);
  return { folder: o.dir, result, truth: rig.truth() };
}

/**
 * A calibration taken the way `calibrate` takes one: the board's readings of known currents and
 * voltages (its true front end, without noise) against a reference meter's readings.
 */
export function referenceCalibration(
  scenario: SimScenario,
  profile: RigProfile = BENCH_PROFILE,
): Calibration {
  const chain = new AnalogChain(profile);
  const fe = scenario.front_end;
  const board = new FrontEnd(
    profile,
    {
      inputOffsetV: fe.current_offset_V ?? (fe.current_offset_A ?? 0) * profile.current.shunt_ohm,
      connectionOhm: fe.current_gain_error * profile.current.shunt_ohm,
      voltageGainError: fe.voltage_gain_error,
      noiseCounts: 0,
    },
    mulberry32(1),
  );
  // Several readings a point, straddling count boundaries as noise would: the mean count is unbiased.
  const mean = (f: (x: number) => number, x: number, width: number): number => {
    let s = 0;
    for (let k = 0; k < 20; k++) s += f(x + ((k - 9.5) / 20) * width);
    return s / 20;
  };
  const current = [0.2, 0.6, 1.0, 1.4].map((a): CalibrationPoint => {
    const raw = mean((x) => board.current(x).counts, a, chain.ampsPerCount);
    return {
      raw_mean: raw,
      samples: 20,
      nominal: chain.amps(raw),
      reference: a,
      reference_u: 0.0005,
    };
  });
  const voltage = [3.0, 3.6, 4.2].map((v): CalibrationPoint => {
    const raw = mean((x) => board.voltage(x).counts, v, chain.voltsPerCount);
    return {
      raw_mean: raw,
      samples: 20,
      nominal: chain.volts(raw),
      reference: v,
      reference_u: 0.0005,
    };
  });
  return sealCalibration({
    format: 1,
    rig: profile.name ?? 'bench rig',
    date: '2026-11-30T09:00:00Z',
    reference_instrument: 'bench multimeter (demo)',
    current: fitQuantity('current', current, 'gain_offset').calibration,
    voltage: fitQuantity('voltage', voltage, 'gain_offset').calibration,
  });
}
