/**
 * The calibration dialogue at a terminal: per quantity, what to connect and which condition to
 * set, then capture, show what the rig read, and ask for the reference meter's reading and
 * accuracy. Questions go through a Prompter, so the dialogue runs the same from a test script.
 */
import type { AnalogChain } from '../chain/analog-chain.js';
import type { CellvigilError } from '../core/errors.js';
import { UNITS, type CalibrationPoint, type Quantity } from './calibration.js';
import type { CapturePoint, PointsByQuantity } from './file-points.js';
import type { CountStats } from './capture.js';
import { formatPoint, sig } from './fit-report.js';
import { nominalOf, toCalibrationPoint } from './nominal-point.js';
import { minPoints, QUANTITIES } from './quantity-fit.js';
import { readingSlip } from './reading-check.js';
import { parseAccuracy } from './reference-accuracy.js';

export interface Prompter {
  ask(question: string): Promise<string>;
  print(line: string): void;
}

const HOW: Record<Quantity, string[]> = {
  voltage: [
    'Connect the reference voltmeter across the cell at the points where the rig senses it (not at the load).',
    'Take points at different voltages: the cell at rest and under load, a nearly full and a nearly empty cell,',
    'or a bench supply in place of the cell at two or three settings.',
  ],
  current: [
    'Put the reference ammeter in series with the load (or read the voltage across a known resistor).',
    'With the load off no current flows: that point is 0 A exactly. With the load on, read the meter',
    'while the rig averages. More currents: another load resistor, or a cell at another voltage.',
  ],
  temperature: [
    'Put the reference thermometer against the cell next to the NTC and wait until both have settled.',
    'One point gives the offset; the thermistor curve itself is taken from the rig profile.',
  ],
};

function yes(answer: string, byDefault: boolean): boolean {
  const a = answer.trim().toLowerCase();
  if (a === '') return byDefault;
  return a === 'y' || a === 'yes';
}

/** What the person answered for a reference reading: a number, or a wish to average again. */
type ReadingAnswer = { reading: number } | 'retake';

/**
 * Asks for the reference reading and checks it against the rig's own reading at once; a reading
 * that looks like a slip is asked again, and kept only when the same value is typed twice.
 */
async function askReading(
  io: Prompter,
  question: string,
  check: (reading: number) => string | null,
  byDefault?: number,
): Promise<ReadingAnswer> {
  let doubted: number | null = null;
  for (;;) {
    const a = (await io.ask(question)).trim();
    if (a.toLowerCase() === 'r') return 'retake';
    const x = a === '' && byDefault !== undefined ? byDefault : Number(a);
    if (a !== '' && !Number.isFinite(x)) {
      io.print(
        `  "${a}" is not a number; type it with a decimal point, e.g. 1.234 (or r to average again)`,
      );
      continue;
    }
    if (a === '' && byDefault === undefined) {
      io.print('  type the reading the reference meter shows (or r to average again)');
      continue;
    }
    const slip = check(x);
    if (slip === null || doubted === x) return { reading: x };
    doubted = x;
    io.print(`  ${slip}.`);
    io.print(
      '  Type the reading again; to keep this very value, type it once more. r averages again.',
    );
  }
}

async function askUncertainty(
  io: Prompter,
  reading: number,
  quantity: Quantity,
  exact: boolean,
  label: string,
): Promise<number> {
  const unit = UNITS[quantity];
  const hint = exact ? ' [u=0: nothing flows]' : '';
  for (;;) {
    const a = (
      await io.ask(
        `  Meter accuracy for this range, e.g. 0.5%+0.003 (limits, rectangular) or u=0.001${hint}: `,
      )
    ).trim();
    try {
      const r = parseAccuracy(
        a === '' && exact ? 'u=0' : a,
        reading,
        `meter accuracy for ${label}`,
        unit,
      );
      io.print(`  reference uncertainty ${sig(r.u, 2)} ${unit} (${r.basis})`);
      return r.u;
    } catch (e) {
      io.print(`  ${(e as CellvigilError).message}`);
    }
  }
}

export interface InteractiveResult {
  points: PointsByQuantity;
  referenceInstrument: string | null;
}

/** One point of a quantity: capture, show what the rig read, ask for the reference. */
async function takePoint(
  io: Prompter,
  capture: CapturePoint,
  chain: AnalogChain,
  windowMs: number,
  q: Quantity,
  k: number,
): Promise<CalibrationPoint> {
  const loadDefault = q === 'current' && k === 2;
  const loadOn =
    q === 'temperature'
      ? false
      : yes(
          await io.ask(`Point ${k}: switch the load on for it? [${loadDefault ? 'Y/n' : 'y/N'}] `),
          loadDefault,
        );
  const label = `${q} point ${k} (load ${loadOn ? 'on' : 'off'})`;
  const fullScale = q === 'voltage' ? chain.fullScale().volts : chain.fullScale().amps;
  const exactZero = q === 'current' && !loadOn;
  for (;;) {
    await io.ask(
      loadOn
        ? `Press Enter to switch the load on and average for ${windowMs / 1000} s; read the meter while it averages `
        : `Set the condition, then press Enter to average for ${windowMs / 1000} s `,
    );
    const w = await capture({ loadOn, windowMs, label });
    const stats: CountStats = w[q];
    const { nominal } = nominalOf(chain, q, stats, label);
    io.print(
      `  rig: raw mean ${stats.mean.toFixed(2)}, sd ${stats.sd.toFixed(2)} counts over ${stats.n} frames (nominal ${sig(nominal, 4)} ${UNITS[q]})`,
    );
    const answer = await askReading(
      io,
      `  Reference reading (${UNITS[q]})${exactZero ? ' [0]' : ''}, or r to average again: `,
      (x) => readingSlip(q, x, nominal, fullScale),
      exactZero ? 0 : undefined,
    );
    if (answer === 'retake') continue;
    const u = await askUncertainty(io, answer.reading, q, exactZero && answer.reading === 0, label);
    return toCalibrationPoint(chain, q, stats, answer.reading, u, label);
  }
}

/** After point k: go on, stop, or take point k again ('retake'). */
async function nextStep(io: Prompter, q: Quantity, k: number): Promise<'more' | 'done' | 'retake'> {
  if (k < minPoints(q)) {
    const a = await io.ask(`Next ${q} point [Enter], or r to take point ${k} again: `);
    return a.trim().toLowerCase() === 'r' ? 'retake' : 'more';
  }
  const recommend = q === 'temperature' ? '' : k < 3 ? ' (three or more recommended)' : '';
  const a = await io.ask(`Another ${q} point?${recommend} [y/N, r takes point ${k} again] `);
  if (a.trim().toLowerCase() === 'r') return 'retake';
  return yes(a, false) ? 'more' : 'done';
}

export async function captureInteractive(
  io: Prompter,
  capture: CapturePoint,
  chain: AnalogChain,
  windowMs: number,
  askInstrument: boolean,
): Promise<InteractiveResult> {
  let referenceInstrument: string | null = null;
  if (askInstrument) {
    const a = (
      await io.ask('Reference instrument (make, model, range, its own calibration date): ')
    ).trim();
    if (a !== '') referenceInstrument = a;
  }
  const points: PointsByQuantity = {};
  for (const q of QUANTITIES) {
    io.print('');
    io.print(`== ${q} ==`);
    for (const line of HOW[q]) io.print(line);
    if (!yes(await io.ask(`Calibrate the ${q}? [Y/n] `), true)) continue;
    const taken = (points[q] = [] as CalibrationPoint[]);
    for (let k = 1; ;) {
      const point = await takePoint(io, capture, chain, windowMs, q, k);
      taken.push(point);
      io.print(`  ${formatPoint('recorded', q, point)}`);
      const step = await nextStep(io, q, k);
      if (step === 'done') break;
      if (step === 'retake') {
        taken.pop();
        io.print(`  point ${k} dropped; take it again.`);
      } else k++;
    }
  }
  return { points, referenceInstrument };
}
