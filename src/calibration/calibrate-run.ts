/**
 * `cellvigil calibrate` as a function: check the request, open the rig (port or simulator),
 * take the points (from a file or by the dialogue), fit, write the calibration file. The load
 * is switched off after every loaded point and again on the way out, whatever happened.
 */
import { basename, resolve } from 'node:path';
import { AnalogChain } from '../chain/analog-chain.js';
import type { RigProfile } from '../chain/rig-profile-types.js';
import { DEFAULT_RIG_PATH, loadRigProfile } from '../chain/rig-profile-file.js';
import { findChemistry } from '../chemistry/chemistries.js';
import { DEFAULT_CHEMISTRIES_PATH, loadChemistries } from '../chemistry/chemistry-file.js';
import { validateCells } from '../chemistry/limits.js';
import type { Clock } from '../core/clock.js';
import { HostClock, PacedClock } from '../core/host-clock.js';
import { ErrorCodes, makeError } from '../core/errors.js';
import {
  DEFAULT_SCENARIOS_PATH,
  loadScenarios,
  pickScenario,
  type SimScenario,
} from '../sim/scenarios.js';
import { SerialSource } from '../sources/serial-source.js';
import { SimSource } from '../sources/sim-source.js';
import type { Source } from '../sources/source.js';
import type { Calibration } from './calibration.js';
import { writeCalibration } from './calibration-file.js';
import type { TruthSample } from './capture.js';
import {
  captureFilePoints,
  checkPointsPlan,
  givenFilePoints,
  type PointsByQuantity,
} from './file-points.js';
import { formatOutcome } from './fit-report.js';
import { captureInteractive, type Prompter } from './interactive.js';
import { makeLoadGuard, type LoadGuard } from './load-guard.js';
import { capturePoint } from './point-capture.js';
import { savePointsAfterRefusal } from './refused-points-file.js';
import { loadPointsFile, type PointsFile } from './points-file.js';
import { buildCalibration, type QuantityOutcome } from './quantity-fit.js';
import { RigLink } from './rig-link.js';

export interface CalibrateRequest {
  /** Serial device of a real rig. */
  port?: string;
  /** Simulated-rig scenario name. */
  sim?: string;
  /** Virtual-clock speed of the simulated rig; 1 is real time. */
  speed: number;
  baud?: number;
  rig?: string;
  /** The calibration file to write. */
  out: string;
  /** The reference instrument's description. */
  reference?: string;
  /** Averaging window per point, s. */
  seconds: number;
  /** Wait after setting a condition, s. */
  settleSeconds: number;
  /** Points to capture, with their reference readings. */
  points?: string;
  /** Points already captured (raw means): fit without a rig. */
  fromPoints?: string;
  chemistry?: string;
  cells?: number;
  chemistriesFile?: string;
  channel: number;
}

export interface CalibrateConnection {
  source: Source;
  clock: Clock;
  /** The simulator's true values (only a simulated rig has them). */
  truth?: () => TruthSample;
}

export interface CalibrateIo {
  print(line: string): void;
  /** For the dialogue at a terminal; without it the points must come from a file. */
  prompter?: Prompter;
  /** Aborting (SIGINT) ends the capture: the load goes off, nothing is written. */
  signal?: AbortSignal;
  /** Replaces opening --port / --sim: tests drive a simulated rig on their own clock. */
  connection?: CalibrateConnection;
}

export interface CalibrateOutcome {
  calibration: Calibration;
  outcomes: QuantityOutcome[];
  /** Whether the rig confirmed the load off at the end; null when no load was switched on. */
  offConfirmed: boolean | null;
}

function usage(what: string, where: string, fix: string): Error {
  return makeError(ErrorCodes.USAGE, what, where, fix);
}

function checkRequest(req: CalibrateRequest, io: CalibrateIo): void {
  const rigs = [req.port, req.sim].filter((x) => x !== undefined).length;
  if (req.fromPoints !== undefined) {
    if (rigs > 0 || req.points !== undefined) {
      throw usage(
        '--from-points fits points captured before and needs no rig',
        '--from-points',
        'Leave out --port, --sim and --points.',
      );
    }
  } else {
    if (rigs !== 1 && !io.connection) {
      throw usage(
        'calibrating needs exactly one rig',
        '--port / --sim',
        'Give --port <device> for a real rig or --sim [scenario] for the simulated one (or --from-points to fit without a rig).',
      );
    }
    if (req.points === undefined && !io.prompter) {
      throw usage(
        'no points file and no terminal to ask at',
        '--points',
        'Give --points <file> with the conditions and reference readings (docs/calibration.md), or run at a terminal for the dialogue.',
      );
    }
  }
  if (!(req.speed > 0) || !Number.isFinite(req.speed))
    throw usage(
      `speed ${req.speed} is not a positive number`,
      '--speed',
      'Give a factor such as 1 (real time) or 50.',
    );
  if (req.port !== undefined && req.speed !== 1)
    throw usage(
      'a real rig runs in real time',
      '--speed',
      'Leave --speed out with --port; it applies to the simulated rig only.',
    );
  if (!(req.seconds > 0 && req.seconds <= 600))
    throw usage(
      `averaging window ${req.seconds} s is out of range`,
      '--seconds',
      'Give 1 to 600 s; 5 is usual.',
    );
  if (!(req.settleSeconds >= 0 && req.settleSeconds <= 600))
    throw usage(
      `settling time ${req.settleSeconds} s is out of range`,
      '--settle',
      'Give 0 to 600 s.',
    );
  if (!Number.isInteger(req.channel) || req.channel < 0 || req.channel > 15)
    throw usage(
      `channel ${req.channel} is not 0..15`,
      '--channel',
      'Give the rig channel the cell is on, 0 to 15.',
    );
}

function instrumentOf(req: CalibrateRequest, file: PointsFile | null): string | null {
  if (req.reference !== undefined && req.reference.trim() !== '') return req.reference.trim();
  if (file?.referenceInstrument !== undefined) return file.referenceInstrument;
  if (file && file.points.every((p) => p.reference === 'truth'))
    return "simulated rig's true values";
  return null;
}

export async function runCalibrate(
  req: CalibrateRequest,
  io: CalibrateIo,
): Promise<CalibrateOutcome> {
  checkRequest(req, io);
  const rigPath = resolve(req.rig ?? DEFAULT_RIG_PATH);
  const profile = await loadRigProfile(rigPath);
  const chain = new AnalogChain(profile);
  const pointsPath = req.fromPoints ?? req.points;
  const file = pointsPath !== undefined ? await loadPointsFile(resolve(pointsPath)) : null;
  const scenario =
    req.sim !== undefined ? pickScenario(loadScenarios(DEFAULT_SCENARIOS_PATH), req.sim) : null;
  if (file)
    checkPointsPlan(
      file,
      req.fromPoints !== undefined ? 'given' : 'capture',
      scenario !== null || io.connection?.truth !== undefined,
    );
  let instrument = instrumentOf(req, file);
  if (instrument === null && !(io.prompter && !file)) {
    throw usage(
      'the reference instrument is not named',
      '--reference',
      'Say which meter gave the readings, e.g. --reference "bench DMM, 10 A range, calibrated 2025-03".',
    );
  }

  const got = await gatherPoints(req, io, {
    profile,
    chain,
    scenario,
    file,
    askInstrument: instrument === null,
  });
  const { points, date, offConfirmed } = got;
  const rigName = got.rigId || (profile.name ?? basename(rigPath));
  instrument ??= got.referenceInstrument;
  let built: ReturnType<typeof buildCalibration>;
  try {
    if (instrument === null) {
      throw usage(
        'the reference instrument is not named',
        '--reference',
        'Say which meter gave the readings (--reference "…"); nothing was written.',
      );
    }
    built = buildCalibration({ rig: rigName, date, referenceInstrument: instrument }, points);
  } catch (e) {
    if (req.fromPoints === undefined)
      io.print(await savePointsAfterRefusal(resolve(req.out), points, instrument));
    throw e;
  }
  const { content, outcomes } = built;
  io.print('');
  for (const o of outcomes) for (const line of formatOutcome(o)) io.print(line);
  const out = resolve(req.out);
  const calibration = await writeCalibration(out, content);
  io.print('');
  io.print(`wrote ${out} (calibration id ${calibration.id})`);
  if (offConfirmed === false) {
    throw makeError(
      ErrorCodes.LOAD_NOT_CONFIRMED,
      'the rig did not confirm that the load is off',
      req.port ?? `scenario ${req.sim ?? ''}`,
      'Check the rig now and disconnect the cell if the load is still on; the calibration file was written.',
    );
  }
  return { calibration, outcomes, offConfirmed };
}

/** The points: from the file as given, or captured on the rig (the load guarded by the cell's limits). */
async function gatherPoints(
  req: CalibrateRequest,
  io: CalibrateIo,
  setup: {
    profile: RigProfile;
    chain: AnalogChain;
    scenario: SimScenario | null;
    file: PointsFile | null;
    askInstrument: boolean;
  },
): Promise<RigPoints> {
  const { profile, chain, scenario, file } = setup;
  if (file && req.fromPoints !== undefined) {
    return {
      points: givenFilePoints(file.points, chain),
      offConfirmed: null,
      date: new Date().toISOString(),
      rigId: null,
      referenceInstrument: null,
    };
  }
  const guard = resolveGuard(req, scenario, profile, chain);
  if (!guard && file?.points.some((p) => p.load === true)) {
    throw usage(
      'loaded points need the chemistry and cell count, so that the safety limits apply while the load is on',
      '--chemistry / --cells',
      'Name the cell on the rig, e.g. --chemistry li-ion --cells 1.',
    );
  }
  return captureOnRig(req, io, { ...setup, guard });
}

function resolveGuard(
  req: CalibrateRequest,
  scenario: SimScenario | null,
  profile: RigProfile,
  chain: AnalogChain,
): LoadGuard | null {
  const chemistryId = req.chemistry ?? scenario?.cell.chemistry;
  if (chemistryId === undefined) {
    if (req.cells !== undefined)
      throw usage(
        '--cells without --chemistry',
        '--chemistry',
        'Name the chemistry too, e.g. --chemistry li-ion.',
      );
    return null;
  }
  const chemistries = loadChemistries(req.chemistriesFile ?? DEFAULT_CHEMISTRIES_PATH);
  const chemistry = findChemistry(chemistries, chemistryId);
  const cells = validateCells(req.cells ?? scenario?.cell.cells ?? 1);
  return makeLoadGuard(chemistry, cells, chemistries, profile, chain);
}

interface RigContext {
  profile: RigProfile;
  chain: AnalogChain;
  guard: LoadGuard | null;
  scenario: SimScenario | null;
  file: PointsFile | null;
  askInstrument: boolean;
}

interface RigPoints {
  points: PointsByQuantity;
  offConfirmed: boolean | null;
  date: string;
  rigId: string | null;
  referenceInstrument: string | null;
}

function connect(
  req: CalibrateRequest,
  scenario: SimScenario | null,
  profile: RigProfile,
): CalibrateConnection & { paced: PacedClock | null } {
  if (scenario) {
    const paced = new PacedClock(0, Date.now());
    const source = new SimSource({ scenario, clock: paced, profile });
    return { source, clock: paced, truth: () => truthOf(source), paced };
  }
  return {
    source: new SerialSource({ path: req.port!, baudRate: req.baud ?? profile.frame.baud }),
    clock: new HostClock(),
    paced: null,
  };
}

function truthOf(source: SimSource): TruthSample {
  const t = source.rig.truth();
  return { voltage: t.terminalV, current: t.currentA, temperature: t.temperatureC };
}

async function captureOnRig(
  req: CalibrateRequest,
  io: CalibrateIo,
  c: RigContext,
): Promise<RigPoints> {
  const conn = io.connection
    ? { ...io.connection, paced: null }
    : connect(req, c.scenario, c.profile);
  const { source, clock } = conn;
  const link = new RigLink({ source, clock, channel: req.channel, adcBits: c.profile.adc.bits });
  conn.paced?.start(req.speed);
  const settings = {
    link,
    chain: c.chain,
    clock,
    channel: req.channel,
    settleMs: req.settleSeconds * 1000,
    guard: c.guard,
    ...(conn.truth ? { truth: conn.truth } : {}),
    ...(io.signal ? { signal: io.signal } : {}),
  };
  const windowMs = req.seconds * 1000;
  let result: Omit<RigPoints, 'offConfirmed'> | null = null;
  let failure: unknown = null;
  try {
    const hello = await link.open(io.signal);
    io.print(
      `rig ${hello.rigId}, firmware ${hello.firmware}, ${hello.adcBits}-bit ADC, on ${source.description}`,
    );
    if (c.guard)
      io.print(
        `limits while a load is on: ${c.guard.cells} × ${c.guard.chemistry.id}, floor ${c.guard.floorV} V, up to ${c.guard.maxTemperatureC} °C`,
      );
    const capture = (r: Parameters<typeof capturePoint>[1]) => capturePoint(settings, r);
    if (c.file) {
      const points = await captureFilePoints(c.file.points, capture, c.chain, windowMs, io.print);
      result = {
        points,
        date: new Date(clock.wallNow()).toISOString(),
        rigId: hello.rigId,
        referenceInstrument: null,
      };
    } else {
      const r = await captureInteractive(io.prompter!, capture, c.chain, windowMs, c.askInstrument);
      result = {
        points: r.points,
        date: new Date(clock.wallNow()).toISOString(),
        rigId: hello.rigId,
        referenceInstrument: r.referenceInstrument,
      };
    }
  } catch (e) {
    failure = e;
  }
  const closed = await link.close();
  conn.paced?.stop();
  if (closed.offConfirmed === false) {
    io.print(`warning: ${closed.error?.message ?? 'the rig did not confirm that the load is off'}`);
  } else if (closed.offConfirmed === true && failure !== null) {
    io.print('the load is off.');
  }
  if (failure !== null || result === null) throw failure;
  return { ...result, offConfirmed: closed.offConfirmed };
}
