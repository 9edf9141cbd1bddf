/**
 * Shared pieces of the benchmarks (docs/benchmarks.md). The product code comes from the build
 * in dist/, loaded by path at run time, and is typed from the sources: the benchmarks measure
 * what `cellvigil` runs, and the package root stays two levels above every module.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { Writable } from 'node:stream';

export type AnalogChainModule = typeof import('../src/chain/analog-chain.js');
export type RigProfileModule = typeof import('../src/chain/rig-profile-file.js');
export type CalibrationModule = typeof import('../src/calibration/calibration.js');
export type CalibrationFileModule = typeof import('../src/calibration/calibration-file.js');
export type QuantityFitModule = typeof import('../src/calibration/quantity-fit.js');
export type CodecModule = typeof import('../src/protocol/codec.js');
export type DaemonModule = typeof import('../src/run/daemon.js');
export type PipelineModule = typeof import('../src/run/pipeline.js');
export type EventLogModule = typeof import('../src/record/event-log.js');
export type RunEvent = import('../src/record/events.js').RunEvent;
export type SessionModule = typeof import('../src/session/session.js');
export type PlausibilityModule = typeof import('../src/session/plausibility.js');
export type LogFileModule = typeof import('../src/sinks/log-file.js');
export type SampleRowModule = typeof import('../src/sinks/sample-row.js');
export type AtomicJsonModule = typeof import('../src/sinks/atomic-json.js');
export type LiveHubModule = typeof import('../src/live/live-hub.js');
export type LiveServerModule = typeof import('../src/live/live-server.js');
export type LiveLinkModule = typeof import('../src/run/live-link.js');
export type RunFolderModule = typeof import('../src/replay/run-folder.js');
export type RecomputeModule = typeof import('../src/report/recompute.js');
export type ChemistriesModule = typeof import('../src/chemistry/chemistries.js');
export type ChemistryFileModule = typeof import('../src/chemistry/chemistry-file.js');
export type ChemistryLimitsModule = typeof import('../src/chemistry/limits.js');

/** The package root: the compiled scripts sit in .bench/scripts/, the sources in scripts/. */
export const ROOT = fileURLToPath(new URL('../../', import.meta.url));
/** Scratch space and cached data (git-ignored). */
export const BENCH_DIR = join(ROOT, '.bench');
export const RIG_PROFILE = join(ROOT, 'config/rigs/bench-20mohm.yaml');

/** A module of the build, e.g. product<DaemonModule>('run/daemon.js'). */
export async function product<M>(rel: string): Promise<M> {
  const path = join(ROOT, 'dist', rel);
  if (!existsSync(path))
    throw new Error(`${path} is missing: run \`npm run build\` first (npm run bench does).`);
  return (await import(pathToFileURL(path).href)) as M;
}

/** One figure as a bench script reports it to the runner. */
export interface Figure {
  /** Short key: ingest, replay, fanout, stalled, soak. */
  figure: string;
  title: string;
  measured: number;
  baseline: number;
  unit: string;
  /** measured / baseline. */
  ratio: number;
  /** The measured and baseline values as the table shows them. */
  measuredText: string;
  baselineText: string;
  target: string;
  pass: boolean;
  details: Record<string, unknown>;
}

/** Writes the figure where the runner asked (`--out <file>`), or prints it. */
export function reportFigure(f: Figure): void {
  const i = process.argv.indexOf('--out');
  const out = i >= 0 ? process.argv[i + 1] : undefined;
  if (out) writeFileSync(out, JSON.stringify(f, null, 2));
  else console.log(JSON.stringify(f, null, 2));
}

/** Value of `--name <value>` on the command line. */
export function argValue(name: string): string | undefined {
  const i = process.argv.indexOf(`--${name}`);
  return i >= 0 ? process.argv[i + 1] : undefined;
}

export const sleep = (ms: number): Promise<void> => new Promise((r) => setTimeout(r, ms));
export const nextTick = (): Promise<void> => new Promise((r) => setImmediate(r));

export async function waitFor(cond: () => boolean, ms: number, what: string): Promise<void> {
  const until = Date.now() + ms;
  while (!cond()) {
    if (Date.now() > until) throw new Error(`timed out after ${ms} ms waiting for ${what}`);
    await sleep(10);
  }
}

/** Swallows what it is given (the daemon's status output). */
export function nullStream(): Writable {
  return new Writable({ write: (_c, _e, done) => done() });
}

export const MB = 1024 * 1024;

export function memory(): { rssMB: number; heapMB: number } {
  const m = process.memoryUsage();
  return { rssMB: m.rss / MB, heapMB: m.heapUsed / MB };
}

/** Full collection when run with --expose-gc (the runner passes it), twice to settle weak refs. */
export function collect(): void {
  const gc = (globalThis as { gc?: () => void }).gc;
  gc?.();
  gc?.();
}

/** Nearest-rank percentile of an ascending array. */
export function percentile(sorted: readonly number[], p: number): number {
  if (sorted.length === 0) return Number.NaN;
  const rank = Math.ceil((p / 100) * sorted.length);
  return sorted[Math.min(sorted.length, Math.max(1, rank)) - 1]!;
}

export function fmt(x: number, digits = 2): string {
  return Number.isFinite(x) ? x.toFixed(digits) : String(x);
}

/** A change with its sign, + or − (two decimals; one that rounds to zero is +0.00). */
export function signed(x: number): string {
  const r = Math.round(x * 100) / 100;
  return `${r < 0 ? '−' : '+'}${fmt(Math.abs(r), 2)}`;
}

/** A socat pseudo-terminal pair: bytes written to one end come out of the other. */
export interface PtyPair {
  host: string;
  rig: string;
  socat: ChildProcess;
  close(): Promise<void>;
}

export async function startPtyPair(dir: string): Promise<PtyPair> {
  const host = join(dir, 'host');
  const rig = join(dir, 'rig');
  const socat = spawn('socat', [`pty,raw,echo=0,link=${host}`, `pty,raw,echo=0,link=${rig}`], {
    stdio: 'ignore',
  });
  const failed = new Promise<never>((_, reject) =>
    socat.once('error', (e) =>
      reject(new Error(`socat: ${e.message} (install it: bash scripts/install-test-tools.sh)`)),
    ),
  );
  await Promise.race([
    waitFor(() => existsSync(host) && existsSync(rig), 5000, 'socat to create the pty pair'),
    failed,
  ]);
  return {
    host,
    rig,
    socat,
    close: async () => {
      if (socat.exitCode !== null || socat.signalCode !== null) return;
      const gone = new Promise((r) => socat.once('exit', r));
      socat.kill('SIGTERM');
      await gone;
    },
  };
}

/** Demo bench cell: what the frames say (our own numbers, a demo scenario). */
export const BENCH_CELL = {
  restV: 4.12,
  loadedV: 3.95,
  loadA: 1.0,
  celsius: 24.5,
} as const;

type AnalogChain = InstanceType<AnalogChainModule['AnalogChain']>;
type DataFrame = Parameters<CodecModule['encodeDataFrame']>[0];

/**
 * Rig lines for the bench rig profile: raw counts for a given cell state with a count or two
 * of noise from a fixed-seed generator, sequence and tick counters that wrap as the rig's do.
 */
export class FrameMaker {
  private seq = 0;
  private tick = 0;
  private state = 0x2545f491;

  constructor(
    private readonly chain: AnalogChain,
    private readonly encode: (f: DataFrame) => string,
    private readonly tickStepMs = 50,
  ) {}

  /** A 32-bit xorshift: the same noise every run. */
  private noise(): number {
    let x = this.state;
    x ^= x << 13;
    x ^= x >>> 17;
    x ^= x << 5;
    this.state = x >>> 0;
    return (this.state % 3) - 1;
  }

  counts(
    volts: number,
    amps: number,
    celsius: number,
  ): { vRaw: number; iRaw: number; tRaw: number } {
    const max = this.chain.maxCount;
    const clamp = (c: number): number => Math.min(max, Math.max(0, Math.round(c)));
    return {
      vRaw: clamp(this.chain.countsForVolts(volts) + this.noise()),
      iRaw: clamp(this.chain.countsForAmps(amps) + this.noise()),
      tRaw: clamp(this.chain.countsForCelsius(celsius) + this.noise()),
    };
  }

  line(volts: number, amps: number, celsius: number, loadOn: boolean): string {
    const c = this.counts(volts, amps, celsius);
    const text = this.encode({
      channel: 0,
      seq: this.seq,
      tickMs: this.tick,
      ...c,
      flags: loadOn ? 1 : 0,
    });
    this.seq = (this.seq + 1) % 65536;
    this.tick = (this.tick + this.tickStepMs) % 2 ** 32;
    return text;
  }
}

export async function benchChain(): Promise<AnalogChain> {
  const { loadRigProfile } = await product<RigProfileModule>('chain/rig-profile-file.js');
  const { AnalogChain } = await product<AnalogChainModule>('chain/analog-chain.js');
  return new AnalogChain(await loadRigProfile(RIG_PROFILE));
}

/**
 * A demo calibration of the bench rig (our own numbers: a board reading 0.6 % low on voltage
 * and 2 % high on current with a small offset), sealed by the product's own code so it passes
 * every check a real one does.
 */
export async function benchCalibration(
  path: string,
): Promise<Awaited<ReturnType<CalibrationFileModule['writeCalibration']>>> {
  const { buildCalibration } = await product<QuantityFitModule>('calibration/quantity-fit.js');
  const { writeCalibration } = await product<CalibrationFileModule>(
    'calibration/calibration-file.js',
  );
  const chain = await benchChain();
  const v = (raw: number, ref: number) => ({
    raw_mean: raw,
    nominal: chain.volts(raw),
    nominal_u: 0.0005,
    reference: ref,
    reference_u: 0.0008,
  });
  const i = (raw: number, ref: number) => ({
    raw_mean: raw,
    nominal: chain.amps(raw),
    nominal_u: 0.0005,
    reference: ref,
    reference_u: 0.001,
  });
  const { content } = buildCalibration(
    {
      rig: 'bench rig, 20 mΩ shunt',
      date: '2026-11-20T09:30:00.000Z',
      referenceInstrument: 'bench demo meter',
    },
    {
      voltage: [
        v(1500, chain.volts(1500) * 1.006 - 0.002),
        v(2500, chain.volts(2500) * 1.006 - 0.002),
      ],
      current: [i(10, chain.amps(10) / 1.02 - 0.004), i(760, chain.amps(760) / 1.02 - 0.004)],
      temperature: [
        {
          raw_mean: 2048,
          nominal: chain.celsius(2048),
          nominal_u: 0.05,
          reference: chain.celsius(2048) + 0.4,
          reference_u: 0.1,
        },
      ],
    },
  );
  return writeCalibration(path, content);
}

type Session = InstanceType<SessionModule['Session']>;
type Pipeline = InstanceType<PipelineModule['Pipeline']>;
type LogFile = InstanceType<LogFileModule['LogFile']>;
type EventLog = InstanceType<EventLogModule['EventLog']>;
type Calibration = NonNullable<Parameters<CalibrationModule['applyCalibration']>[0]>;
type SampleRow = Parameters<SampleRowModule['formatSampleRow']>[0];

export const ROTATE_BYTES = 16 * 1024 * 1024;

/**
 * The daemon's core without its ports and timers, for feeding frames as fast as possible on
 * virtual time: session, pipeline, rotating sample log and event log in a run folder with its
 * manifest, the session's actions handled as the daemon handles them. The rig's load follows
 * the LOAD commands, as a rig's would.
 */
export class CoreRun {
  rigLoadOn = false;
  ended = false;
  rows = 0;
  private flushing: Promise<void> = Promise.resolve();
  private constructor(
    readonly folder: string,
    readonly session: Session,
    readonly pipeline: Pipeline,
    readonly samples: LogFile,
    readonly events: EventLog,
    private readonly rowWriter: {
      write: (r: SampleRow, buf: Buffer, at: number) => number;
      maxBytes: (r: SampleRow) => number;
    },
    private readonly startWallMs: number,
  ) {}

  static async create(
    folder: string,
    calibration: Calibration,
    startWallMs: number,
  ): Promise<CoreRun> {
    const { Session } = await product<SessionModule>('session/session.js');
    const { Pipeline } = await product<PipelineModule>('run/pipeline.js');
    const { LogFile } = await product<LogFileModule>('sinks/log-file.js');
    const { EventLog } = await product<EventLogModule>('record/event-log.js');
    const { SAMPLE_HEADER, SampleRowWriter, sampleRowMaxBytes } =
      await product<SampleRowModule>('sinks/sample-row.js');
    const rowWriter = { write: new SampleRowWriter().write, maxBytes: sampleRowMaxBytes };
    const { applyCalibration } = await product<CalibrationModule>('calibration/calibration.js');
    const { writeJsonAtomic } = await product<AtomicJsonModule>('sinks/atomic-json.js');
    const { findChemistry } = await product<ChemistriesModule>('chemistry/chemistries.js');
    const { loadChemistries } = await product<ChemistryFileModule>('chemistry/chemistry-file.js');
    const { checkRestingVoltage, resolveCutoff } =
      await product<ChemistryLimitsModule>('chemistry/limits.js');
    const { loadRigProfile } = await product<RigProfileModule>('chain/rig-profile-file.js');
    const { AnalogChain } = await product<AnalogChainModule>('chain/analog-chain.js');
    const profile = await loadRigProfile(RIG_PROFILE);
    const chain = new AnalogChain(profile);
    const chemistries = loadChemistries();
    const chemistry = findChemistry(chemistries, 'li-ion');
    const cutoff = resolveCutoff(chemistry, 1);
    const floorV = chemistry.floor_V_per_cell.value;
    const maxCurrentA = 0.98 * chain.fullScale().amps;
    const { plausibilityFor } = await product<PlausibilityModule>('session/plausibility.js');
    const session = new Session({
      channel: 0,
      cutoffV: cutoff.total,
      floorV,
      maxTemperatureC: chemistry.max_temperature_C.value,
      maxCurrentA,
      plausibility: plausibilityFor({
        maxRestVPerCell: chemistry.max_rest_V_per_cell.value,
        cells: 1,
        ampsPerCount: chain.ampsPerCount,
      }),
      checkRest: (restV) => {
        const check = checkRestingVoltage(chemistry, 1, restV, cutoff.perCell, chemistries);
        return check.ok ? null : check.error.message;
      },
    });
    const pipeline = new Pipeline({
      channel: 0,
      adcBits: profile.adc.bits,
      converter: chain,
      corrector: applyCalibration(calibration),
      session,
      originMs: 0,
    });
    const samples = new LogFile({
      dir: folder,
      name: 'samples-',
      ext: '.csv',
      header: SAMPLE_HEADER,
      rotateBytes: ROTATE_BYTES,
    });
    const events = new EventLog(folder);
    await writeJsonAtomic(join(folder, 'manifest.json'), {
      format: 'cellvigil-run',
      format_version: 1,
      cellvigil_version: '0.1.0',
      node_version: process.version,
      label: 'bench',
      started_wall: new Date(startWallMs).toISOString(),
      source: { kind: 'serial', description: 'benchmark frames' },
      channel: 0,
      rig: { file: RIG_PROFILE, profile },
      calibration: { file: null, id: calibration.id, content: calibration },
      chemistry: { id: chemistry.id, profile: chemistry },
      cells: 1,
      cutoff_V: cutoff.total,
      cutoff_per_cell_V: cutoff.perCell,
      cutoff_source: cutoff.source,
      floor_V: floorV,
      limits: { max_temperature_C: chemistry.max_temperature_C.value, max_current_A: maxCurrentA },
      samples: { prefix: 'samples-', rotate_bytes: ROTATE_BYTES },
    });
    const run = new CoreRun(folder, session, pipeline, samples, events, rowWriter, startWallMs);
    run.act(session.begin(0), 0);
    return run;
  }

  private act(actions: ReturnType<Session['tick']>, atMs: number): void {
    for (const a of actions) {
      if (a.type === 'send') {
        if (a.command.command === 'LOAD') this.rigLoadOn = a.command.on;
        if (a.command.command !== 'BEAT')
          this.events.write(atMs / 1000, this.startWallMs + atMs, {
            event: 'command',
            line: `${a.command.command}`,
            queued: true,
          });
      } else if (a.type === 'event') {
        this.events.write(atMs / 1000, this.startWallMs + atMs, {
          event: a.name,
          ...a.detail,
        } as RunEvent);
      } else {
        this.ended = true;
        this.events.write(atMs / 1000, this.startWallMs + atMs, {
          event: 'run_ended',
          end_reason: a.reason,
          detail: a.detail,
          load_off_confirmed: a.loadOffConfirmed,
        });
      }
    }
  }

  /** One rig line (without its `\n`, as the line splitter hands it on) arriving at `atMs` (virtual, from the run's start); returns its row, if any. */
  line(text: string, atMs: number): SampleRow | null {
    const out = this.pipeline.line(text, atMs, this.startWallMs + atMs);
    if (out.kind === 'sample') {
      this.samples.appendWith(out.row, this.rowWriter.maxBytes(out.row), this.rowWriter.write);
      this.rows++;
      this.act(out.actions, atMs);
      return out.row;
    }
    if (out.kind === 'message') this.act(out.actions, atMs);
    return null;
  }

  tick(atMs: number): void {
    this.act(this.session.tick(atMs), atMs);
  }

  stop(atMs: number): void {
    this.act(this.session.requestStop(atMs, 'the benchmark'), atMs);
  }

  /** Starts writing what is queued once the previous write is done; waits for that one (backpressure). */
  async flush(): Promise<void> {
    await this.flushing;
    this.flushing = Promise.all([this.samples.flush(), this.events.flush()]).then(() => undefined);
  }

  async close(): Promise<void> {
    await this.flushing;
    await Promise.all([this.samples.close(), this.events.close()]);
  }
}

/** The run a live-feed benchmark pretends to serve: one Li-ion cell at the default limits. */
export function benchRunInfo(
  label: string,
): Parameters<InstanceType<LiveHubModule['LiveHub']>['setRun']>[0] {
  return {
    label,
    run_folder: `runs/${label}`,
    chemistry: 'li-ion',
    cells: 1,
    cutoff_V: 3,
    floor_V: 2.5,
    calibration_id: 'none',
    started_wall: new Date().toISOString(),
    source: 'benchmark',
    max_temperature_C: 60,
  };
}
