/**
 * Figure 6, accuracy: a Monte Carlo over simulated rigs with random front-end errors, rig clock
 * errors and link faults. Each rig is calibrated from the points a reference meter of stated
 * accuracy would give (its error drawn inside its stated limits), then discharges a cell through
 * the product's pipeline, session, sample and event logs and result on virtual time. Figures:
 * the median |capacity error| against the simulator's truth, and how often the stated k = 2
 * interval covers the truth, for a bench-class and a handheld-class meter. Baseline: the median
 * |capacity error| of the same runs' uncorrected current (the rig as it comes).
 */
import { mkdirSync, mkdtempSync, rmSync } from 'node:fs';
import { join } from 'node:path';
import {
  argValue,
  BENCH_DIR,
  fmt,
  product,
  reportFigure,
  RIG_PROFILE,
  type AnalogChainModule,
  type AtomicJsonModule,
  type CalibrationModule,
  type ChemistriesModule,
  type ChemistryFileModule,
  type ChemistryLimitsModule,
  type CodecModule,
  type EventLogModule,
  type LogFileModule,
  type PipelineModule,
  type PlausibilityModule,
  type QuantityFitModule,
  type RigProfileModule,
  type SampleRowModule,
  type SessionModule,
} from './bench-kit.js';

type ScenariosModule = typeof import('../src/sim/scenarios.js');
type FrontEndModule = typeof import('../src/sim/front-end.js');
type PrngModule = typeof import('../src/sim/prng.js');
type ClockModule = typeof import('../src/core/clock.js');
type LineBufferModule = typeof import('../src/sources/line-buffer.js');
type ResultModule = typeof import('../src/record/result.js');
type NominalPointModule = typeof import('../src/calibration/nominal-point.js');
type CaptureModule = typeof import('../src/calibration/capture.js');
type AccuracyModule = typeof import('../src/calibration/reference-accuracy.js');
type SimScenario = import('../src/sim/scenarios.js').SimScenario;
type Calibration = import('../src/calibration/calibration.js').Calibration;
type CalibrationPoint = import('../src/calibration/calibration.js').CalibrationPoint;
type RunResult = import('../src/record/result.js').RunResult;
type Action = import('../src/session/session-types.js').Action;
type SessionEnd = import('../src/session/session-types.js').SessionEnd;

const TRIALS = Number(argValue('trials') ?? 50);
const SEED = Number(argValue('seed') ?? 20261203);
/** Stated accuracy of the two reference meters: ±(percent of reading + fixed part). */
const METERS = [
  { name: 'bench', spec: '0.1%+0.0005', pct: 0.1, fixed: 0.0005 },
  { name: 'handheld', spec: '0.5%+0.003', pct: 0.5, fixed: 0.003 },
] as const;
type Meter = (typeof METERS)[number];
const TARGET_MEDIAN_PCT = 0.1;
const TARGET_COVERAGE = 0.95;
/** Calibration points: the reference meter's currents and voltages (our own choice of loads). */
const CURRENT_POINTS_A = [0.2, 0.6, 1.0, 1.6];
const VOLTAGE_POINTS_V = [3.0, 3.6, 4.2];
/** Frames averaged for one calibration point, as `calibrate` averages a window of them. */
const FRAMES_PER_POINT = 100;

interface Modules {
  scenarios: ScenariosModule;
  frontEnd: FrontEndModule;
  prng: PrngModule;
  clock: ClockModule;
  lines: LineBufferModule;
  result: ResultModule;
  nominal: NominalPointModule;
  capture: CaptureModule;
  accuracy: AccuracyModule;
  fit: QuantityFitModule;
  calibration: CalibrationModule;
  codec: CodecModule;
  session: SessionModule;
  plausibility: PlausibilityModule;
  pipeline: PipelineModule;
  logFile: LogFileModule;
  eventLog: EventLogModule;
  sampleRow: SampleRowModule;
  atomicJson: AtomicJsonModule;
  chemistries: ChemistriesModule;
  chemistryFile: ChemistryFileModule;
  limits: ChemistryLimitsModule;
  chain: AnalogChainModule;
  rigProfile: RigProfileModule;
}

async function load(): Promise<Modules> {
  return {
    scenarios: await product<ScenariosModule>('sim/scenarios.js'),
    frontEnd: await product<FrontEndModule>('sim/front-end.js'),
    prng: await product<PrngModule>('sim/prng.js'),
    clock: await product<ClockModule>('core/clock.js'),
    lines: await product<LineBufferModule>('sources/line-buffer.js'),
    result: await product<ResultModule>('record/result.js'),
    nominal: await product<NominalPointModule>('calibration/nominal-point.js'),
    capture: await product<CaptureModule>('calibration/capture.js'),
    accuracy: await product<AccuracyModule>('calibration/reference-accuracy.js'),
    fit: await product<QuantityFitModule>('calibration/quantity-fit.js'),
    calibration: await product<CalibrationModule>('calibration/calibration.js'),
    codec: await product<CodecModule>('protocol/codec.js'),
    session: await product<SessionModule>('session/session.js'),
    plausibility: await product<PlausibilityModule>('session/plausibility.js'),
    pipeline: await product<PipelineModule>('run/pipeline.js'),
    logFile: await product<LogFileModule>('sinks/log-file.js'),
    eventLog: await product<EventLogModule>('record/event-log.js'),
    sampleRow: await product<SampleRowModule>('sinks/sample-row.js'),
    atomicJson: await product<AtomicJsonModule>('sinks/atomic-json.js'),
    chemistries: await product<ChemistriesModule>('chemistry/chemistries.js'),
    chemistryFile: await product<ChemistryFileModule>('chemistry/chemistry-file.js'),
    limits: await product<ChemistryLimitsModule>('chemistry/limits.js'),
    chain: await product<AnalogChainModule>('chain/analog-chain.js'),
    rigProfile: await product<RigProfileModule>('chain/rig-profile-file.js'),
  };
}

/** One random rig and cell: the board's errors, its clock, its link, the discharge. */
function randomScenario(rng: () => number, k: number): SimScenario {
  const u = (lo: number, hi: number): number => lo + (hi - lo) * rng();
  return {
    name: `mc-${k}`,
    description: 'Monte Carlo rig',
    cell: {
      chemistry: 'li-ion',
      cells: 1,
      capacity_Ah: u(0.1, 0.15),
      initial_soc: 1,
      internal_ohm_per_cell: u(0.03, 0.08),
    },
    thermal: {
      ambient_C: 22,
      heat_capacity_J_per_K: 20,
      conductance_W_per_K: 0.08,
      load_heat_fraction: 0,
      extra_heat_W: 0,
    },
    load: { load_ohm: u(2.5, 4), mosfet_ohm: 0.015 },
    front_end: {
      current_offset_A: u(-0.05, 0.05),
      current_gain_error: u(-0.08, 0.08),
      voltage_gain_error: u(-0.03, 0.03),
      noise_counts: u(0.3, 1.5),
    },
    rig: {
      rig_id: `mc-${k}`,
      firmware: 'sim-1.0',
      clock_error: u(-0.3, 0.3),
      frame_period_ms: 50,
      channel: 0,
    },
    faults: {
      drop_probability: u(0, 0.01),
      garbage_probability: u(0, 0.01),
      burst_frames: 1 + Math.floor(rng() * 5),
      seed: 1 + Math.floor(rng() * 1e9),
    },
  };
}

/**
 * The points `calibrate` would take on this board against `meter`: the mean of a window of
 * noisy counts at each true value, and the meter's reading of that value, off by an error
 * inside its stated limits: a scale part and a fixed part, each drawn uniformly within its
 * limit once per meter and common to all its points (the harder case: errors that do not
 * average out across the points), with the stated uncertainty the meter's limits give.
 */
function calibrate(
  m: Modules,
  scenario: SimScenario,
  meter: Meter,
  rng: () => number,
  profile: import('../src/chain/rig-profile-types.js').RigProfile,
  chain: import('../src/chain/analog-chain.js').AnalogChain,
): Calibration {
  const fe = scenario.front_end;
  const board = new m.frontEnd.FrontEnd(
    profile,
    {
      inputOffsetV: (fe.current_offset_A ?? 0) * profile.current.shunt_ohm,
      connectionOhm: fe.current_gain_error * profile.current.shunt_ohm,
      voltageGainError: fe.voltage_gain_error,
      noiseCounts: fe.noise_counts,
    },
    m.prng.mulberry32(1 + Math.floor(rng() * 1e9)),
  );
  const sym = (): number => 2 * rng() - 1;
  const scale = sym() * (meter.pct / 100);
  const common = sym() * meter.fixed;
  const reading = (x: number): number => x + scale * x + common;
  const point = (
    quantity: 'current' | 'voltage',
    x: number,
    counts: (v: number) => number,
  ): CalibrationPoint => {
    const avg = new m.capture.CountAverager();
    for (let i = 0; i < FRAMES_PER_POINT; i++) avg.add(counts(x));
    const ref = reading(x);
    const u = m.accuracy.parseAccuracy(
      meter.spec,
      ref,
      'bench',
      quantity === 'current' ? 'A' : 'V',
    );
    return m.nominal.toCalibrationPoint(chain, quantity, avg.stats(), ref, u.u, 'bench');
  };
  const { content } = m.fit.buildCalibration(
    {
      rig: profile.name ?? 'bench rig',
      date: '2026-12-03T09:00:00Z',
      referenceInstrument: meter.name,
    },
    {
      current: CURRENT_POINTS_A.map((a) => point('current', a, (x) => board.current(x).counts)),
      voltage: VOLTAGE_POINTS_V.map((v) => point('voltage', v, (x) => board.voltage(x).counts)),
    },
  );
  return m.calibration.sealCalibration(content);
}

interface Trial {
  meter: string;
  errorPct: number;
  expandedPct: number;
  covered: boolean;
  energyErrorPct: number;
  energyCovered: boolean;
  nominalErrorPct: number;
  endReason: string;
  clockError: number;
}

/** One discharge through the daemon's core on a virtual clock, as test/report/sim-run.ts runs it. */
async function discharge(
  m: Modules,
  dir: string,
  scenario: SimScenario,
  calibration: Calibration,
  profile: import('../src/chain/rig-profile-types.js').RigProfile,
  chain: import('../src/chain/analog-chain.js').AnalogChain,
): Promise<{ result: RunResult; truthAh: number; truthWh: number; nominalAh: number }> {
  mkdirSync(dir, { recursive: true });
  const startedWall = Date.UTC(2026, 11, 3, 9, 0, 0);
  const clock = new m.clock.VirtualClock(0, startedWall);
  const rig = m.scenarios.buildSimRig(scenario, clock, profile);
  const chemistries = m.chemistryFile.loadChemistries();
  const chemistry = m.chemistries.findChemistry(chemistries, scenario.cell.chemistry);
  const cells = scenario.cell.cells;
  const cutoff = m.limits.resolveCutoff(chemistry, cells);
  const session = new m.session.Session({
    channel: 0,
    cutoffV: cutoff.total,
    floorV: chemistry.floor_V_per_cell.value * cells,
    maxTemperatureC: chemistry.max_temperature_C.value,
    maxCurrentA: 0.98 * chain.fullScale().amps,
    plausibility: m.plausibility.plausibilityFor({
      maxRestVPerCell: chemistry.max_rest_V_per_cell.value,
      cells,
      ampsPerCount: chain.ampsPerCount,
    }),
    checkRest: (v) => {
      const c = m.limits.checkRestingVoltage(chemistry, cells, v, cutoff.perCell, chemistries);
      return c.ok ? null : c.error.message;
    },
  });
  const pipeline = new m.pipeline.Pipeline({
    channel: 0,
    adcBits: profile.adc.bits,
    converter: chain,
    corrector: m.calibration.applyCalibration(calibration),
    session,
    originMs: 0,
  });
  const rowWriter = new m.sampleRow.SampleRowWriter();
  const samples = new m.logFile.LogFile({
    dir,
    name: 'samples-',
    ext: '.csv',
    header: m.sampleRow.SAMPLE_HEADER,
    rotateBytes: 16 * 1024 * 1024,
  });
  const events = new m.eventLog.EventLog(dir);
  let end: { reason: string; detail: string; confirmed: boolean } | null = null;
  let loaded = 0;
  let gaps = 0;
  const dispatch = (actions: Action[]): void => {
    for (const a of actions) {
      if (a.type === 'send') {
        const line = m.codec.encodeCommand(a.command);
        clock.setTimer(() => rig.receive(line), 2);
      } else if (a.type === 'event') {
        events.writeForeign(clock.now() / 1000, clock.wallNow(), a.name, a.detail);
      } else {
        end ??= { reason: a.reason, detail: a.detail, confirmed: a.loadOffConfirmed };
      }
    }
  };
  const lines = new m.lines.LineBuffer(
    256,
    (text) => {
      if (end) return;
      const out = pipeline.line(text, clock.now(), clock.wallNow());
      if (out.kind === 'sample') {
        samples.appendWith(out.row, m.sampleRow.sampleRowMaxBytes(out.row), rowWriter.write);
        if (session.loadOn) loaded++;
        if (out.gap) gaps++;
        dispatch(out.actions);
      } else if (out.kind === 'rejected') {
        events.rejected(clock.now() / 1000, clock.wallNow(), out.reason, out.detail, text);
      } else if (out.kind === 'message') {
        dispatch(out.actions);
      }
    },
    () => undefined,
  );
  rig.start((chunk) => lines.push(chunk));
  clock.setTimer(() => dispatch(session.tick(clock.now())), 100, true);
  dispatch(session.begin(clock.now()));
  const limitMs = 3 * 3600 * 1000;
  while (end === null && clock.now() < limitMs) {
    clock.advance(1000);
    if (clock.now() % 60_000 === 0) await Promise.all([samples.flush(), events.flush()]);
  }
  rig.stop();
  const e = end as { reason: string; detail: string; confirmed: boolean } | null;
  if (!e) throw new Error(`${scenario.name}: the discharge did not end within 3 h`);
  const result = m.result.buildResult({
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
  await Promise.all([samples.close(), events.close()]);
  await m.atomicJson.writeJsonAtomic(join(dir, 'result.json'), result);
  const truth = rig.truth();
  return {
    result,
    truthAh: truth.chargeAh,
    truthWh: truth.energyWh,
    nominalAh: pipeline.nominalAh,
  };
}

const median = (xs: readonly number[]): number => {
  const s = [...xs].sort((a, b) => a - b);
  const n = s.length;
  return n === 0 ? Number.NaN : n % 2 ? s[(n - 1) / 2]! : (s[n / 2 - 1]! + s[n / 2]!) / 2;
};

async function main(): Promise<void> {
  mkdirSync(BENCH_DIR, { recursive: true });
  const work = mkdtempSync(join(BENCH_DIR, 'accuracy-'));
  try {
    const m = await load();
    const profile = await m.rigProfile.loadRigProfile(RIG_PROFILE);
    const chain = new m.chain.AnalogChain(profile);
    const rng = m.prng.mulberry32(SEED);
    const trials: Trial[] = [];
    for (const meter of METERS) {
      for (let k = 0; k < TRIALS; k++) {
        const scenario = randomScenario(rng, k);
        const cal = calibrate(m, scenario, meter, rng, profile, chain);
        const r = await discharge(
          m,
          join(work, `${meter.name}-${k}`),
          scenario,
          cal,
          profile,
          chain,
        );
        const err = r.result.capacity_Ah - r.truthAh;
        const errWh = r.result.energy_Wh - r.truthWh;
        trials.push({
          meter: meter.name,
          errorPct: (100 * err) / r.truthAh,
          expandedPct: (100 * r.result.uncertainty.capacity_Ah.expanded) / r.truthAh,
          covered: Math.abs(err) <= r.result.uncertainty.capacity_Ah.expanded,
          energyErrorPct: (100 * errWh) / r.truthWh,
          energyCovered: Math.abs(errWh) <= r.result.uncertainty.energy_Wh.expanded,
          nominalErrorPct: (100 * (r.nominalAh - r.truthAh)) / r.truthAh,
          endReason: r.result.end_reason,
          clockError: scenario.rig.clock_error,
        });
        rmSync(join(work, `${meter.name}-${k}`), { recursive: true, force: true });
      }
    }
    const by = (name: string): Trial[] => trials.filter((t) => t.meter === name);
    const summary = METERS.map((meter) => {
      const t = by(meter.name);
      return {
        meter: meter.name,
        spec: meter.spec,
        trials: t.length,
        median_abs_error_pct: Number(median(t.map((x) => Math.abs(x.errorPct))).toFixed(4)),
        max_abs_error_pct: Number(Math.max(...t.map((x) => Math.abs(x.errorPct))).toFixed(4)),
        median_expanded_pct: Number(median(t.map((x) => x.expandedPct)).toFixed(4)),
        coverage: t.filter((x) => x.covered).length / t.length,
        energy_median_abs_error_pct: Number(
          median(t.map((x) => Math.abs(x.energyErrorPct))).toFixed(4),
        ),
        energy_coverage: t.filter((x) => x.energyCovered).length / t.length,
        uncorrected_median_abs_error_pct: Number(
          median(t.map((x) => Math.abs(x.nominalErrorPct))).toFixed(3),
        ),
        not_cutoff: t.filter((x) => x.endReason !== 'cutoff').length,
      };
    });
    const bench = summary[0]!;
    const measured = bench.median_abs_error_pct;
    const baseline = median(by('bench').map((x) => Math.abs(x.nominalErrorPct)));
    const pass =
      measured <= TARGET_MEDIAN_PCT &&
      summary.every((s) => s.coverage >= TARGET_COVERAGE && s.not_cutoff === 0);
    for (const s of summary)
      process.stderr.write(
        `accuracy: ${s.meter} meter (${s.spec}): median |error| ${fmt(s.median_abs_error_pct, 3)} %, max ${fmt(s.max_abs_error_pct, 3)} %, median U(k=2) ${fmt(s.median_expanded_pct, 3)} %, coverage ${fmt(s.coverage * 100, 0)} % (energy: ${fmt(s.energy_median_abs_error_pct, 3)} %, ${fmt(s.energy_coverage * 100, 0)} %), uncorrected ${fmt(s.uncorrected_median_abs_error_pct, 2)} %\n`,
      );
    reportFigure({
      figure: 'accuracy',
      title: `capacity accuracy over ${TRIALS} simulated rigs per meter class`,
      measured,
      baseline,
      unit: '%',
      ratio: measured / baseline,
      measuredText: `median ${fmt(measured, 3)} %, coverage ${summary.map((s) => `${fmt(s.coverage * 100, 0)} %`).join(' / ')}`,
      baselineText: `uncorrected ${fmt(baseline, 2)} %`,
      target: `median ≤ ${TARGET_MEDIAN_PCT} %, coverage ≥ ${TARGET_COVERAGE * 100} %`,
      pass,
      details: { seed: SEED, trials_per_meter: TRIALS, summary, trials },
    });
  } finally {
    rmSync(work, { recursive: true, force: true });
  }
}

main().catch((e: unknown) => {
  console.error(`bench-accuracy: ${(e as Error).stack ?? String(e)}`);
  process.exit(1);
});
