/**
 * The calibration dialogue at a terminal: per quantity, what to connect and which condition to
 * set, then capture, show what the rig read, and ask for the reference meter's reading and
 * accuracy. Questions go through a Prompter, so the dialogue runs the same from a test script.
 */
import type { AnalogChain } from '../chain/analog-chain.js';
import type { CellvigilError } from '../core/errors.js';
import { UNITS, type Quantity } from './calibration.js';
import type { CapturePoint, PointsByQuantity } from './file-points.js';
import { formatPoint, sig } from './fit-report.js';
import { toCalibrationPoint } from './nominal-point.js';
import { minPoints, QUANTITIES } from './quantity-fit.js';
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

async function askNumber(io: Prompter, question: string, byDefault?: number): Promise<number> {
  for (;;) {
    const a = (await io.ask(question)).trim();
    if (a === '' && byDefault !== undefined) return byDefault;
    const x = Number(a);
    if (a !== '' && Number.isFinite(x)) return x;
    io.print(`  "${a}" is not a number; type it with a decimal point, e.g. 1.234`);
  }
}

async function askUncertainty(
  io: Prompter,
  reading: number,
  quantity: Quantity,
  exact: boolean,
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
      const r = parseAccuracy(a === '' && exact ? 'u=0' : a, reading, 'accuracy', unit);
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
    const taken = (points[q] = [] as NonNullable<PointsByQuantity[Quantity]>);
    for (let k = 1; ; k++) {
      const loadDefault = q === 'current' && k === 2;
      const loadOn =
        q === 'temperature'
          ? false
          : yes(
              await io.ask(
                `Point ${k}: switch the load on for it? [${loadDefault ? 'Y/n' : 'y/N'}] `,
              ),
              loadDefault,
            );
      const label = `${q} point ${k} (load ${loadOn ? 'on' : 'off'})`;
      await io.ask(
        loadOn
          ? `Press Enter to switch the load on and average for ${windowMs / 1000} s; read the meter while it averages `
          : `Set the condition, then press Enter to average for ${windowMs / 1000} s `,
      );
      const w = await capture({ loadOn, windowMs, label });
      const stats = w[q];
      io.print(
        `  rig: raw mean ${stats.mean.toFixed(2)}, sd ${stats.sd.toFixed(2)} counts over ${stats.n} frames`,
      );
      const exactZero = q === 'current' && !loadOn;
      const reading = await askNumber(
        io,
        `  Reference reading (${UNITS[q]})${exactZero ? ' [0]' : ''}: `,
        exactZero ? 0 : undefined,
      );
      const u = await askUncertainty(io, reading, q, exactZero && reading === 0);
      const point = toCalibrationPoint(chain, q, stats, reading, u, label);
      taken.push(point);
      io.print(`  ${formatPoint('recorded', q, point)}`);
      const need = minPoints(q);
      if (k < need) continue;
      const recommend = q === 'temperature' ? '' : k < 3 ? ' (three or more recommended)' : '';
      if (!yes(await io.ask(`Another ${q} point?${recommend} [y/N] `), false)) break;
    }
  }
  return { points, referenceInstrument };
}
