/** The plots of a run (or of several overlaid) from its bounded curve. */
import type { CurveBucket } from './curve.js';
import { CURRENT_COLOUR, RULE_COLOUR, TEMPERATURE_COLOUR, VOLTAGE_COLOUR } from './html-page.js';
import { linePlot, type PlotSeries } from './svg-plot.js';

/** The resting voltage of a pulsed run: grey, beside the loaded line. */
const REST_COLOUR = '#64748b';

export interface TimeUnit {
  name: string;
  seconds: number;
}

/** Hours for long runs, minutes for medium ones, seconds for short ones. */
export function timeUnitFor(spanS: number): TimeUnit {
  if (spanS > 2 * 3600) return { name: 'h', seconds: 3600 };
  if (spanS > 120) return { name: 'min', seconds: 60 };
  return { name: 's', seconds: 1 };
}

export function spanOf(curve: readonly CurveBucket[]): { t0: number; t1: number } {
  return { t0: curve[0]?.t0 ?? 0, t1: curve.at(-1)?.t1 ?? 0 };
}

/** Loaded voltage against charge delivered. */
export function voltageChargeSeries(
  curve: readonly CurveBucket[],
  name: string,
  color: string,
): PlotSeries {
  return {
    name,
    color,
    points: curve
      .filter((b) => b.nOn > 0)
      .map((b) => [(b.q0 + b.q1) / 2, b.vOnSum / b.nOn] as const),
  };
}

type Pick = (b: CurveBucket) => { mean: number; lo: number; hi: number } | null;

const pickVoltage: Pick = (b) => ({ mean: b.vSum / b.n, lo: b.vMin, hi: b.vMax });
const pickCurrent: Pick = (b) => ({ mean: b.iSum / b.n, lo: b.iMin, hi: b.iMax });
// A pulsed run's buckets hold loaded and resting frames; their plain mean would draw a line
// between the two that the cell never showed. Loaded and resting are drawn apart instead.
const pickLoadedVoltage: Pick = (b) =>
  b.nOn > 0 ? { mean: b.vOnSum / b.nOn, lo: b.vMin, hi: b.vMax } : null;
const pickRestingVoltage: Pick = (b) =>
  b.n > b.nOn
    ? { mean: (b.vSum - b.vOnSum) / (b.n - b.nOn), lo: Number.NaN, hi: Number.NaN }
    : null;
// With the load off no current flows, so the current while loaded is the sum over loaded frames.
const pickLoadedCurrent: Pick = (b) =>
  b.nOn > 0 ? { mean: b.iSum / b.nOn, lo: b.iMin, hi: b.iMax } : null;

/** Whether some bucket mixes loaded and resting frames (a pulsed or scheduled run). */
export function isPulsed(curve: readonly CurveBucket[]): boolean {
  return curve.some((b) => b.nOn > 0 && b.nOn < b.n);
}
const pickTemperature: Pick = (b) =>
  b.tempN > 0 ? { mean: b.tempSum / b.tempN, lo: Number.NaN, hi: Number.NaN } : null;

function timeSeries(
  curve: readonly CurveBucket[],
  pick: Pick,
  unit: TimeUnit,
  origin: number,
  name: string,
  color: string,
  band: boolean,
): PlotSeries {
  const points: Array<readonly [number, number]> = [];
  const bandPts: Array<readonly [number, number, number]> = [];
  for (const b of curve) {
    const v = pick(b);
    if (!v) continue;
    const x = ((b.t0 + b.t1) / 2 - origin) / unit.seconds;
    points.push([x, v.mean]);
    if (band && v.hi - v.lo > 0) bandPts.push([x, v.lo, v.hi]);
  }
  // A band only where it adds something: pulses or noise wider than the line.
  return bandPts.length > 1 ? { name, color, points, band: bandPts } : { name, color, points };
}

export function voltageChargePlot(series: PlotSeries[], cutoffV: number | null): string {
  return linePlot({
    id: 'voltage-charge',
    title: 'Loaded voltage against charge delivered',
    x: { label: 'charge delivered (Ah)', min: 0 },
    y: { label: 'voltage (V)' },
    series,
    ...(cutoffV !== null
      ? { rules: [{ y: cutoffV, label: `cutoff ${cutoffV.toFixed(3)} V`, color: RULE_COLOUR }] }
      : {}),
  });
}

/** Voltage, current and temperature against time since the start, one panel each. */
export function timePlots(
  curve: readonly CurveBucket[],
  cutoffV: number | null,
  maxTemperatureC: number | null = null,
): string {
  const { t0, t1 } = spanOf(curve);
  const unit = timeUnitFor(t1 - t0);
  const x = { label: `time since the start (${unit.name})`, min: 0 };
  const temp = timeSeries(
    curve,
    pickTemperature,
    unit,
    t0,
    'temperature',
    TEMPERATURE_COLOUR,
    false,
  );
  const pulsed = isPulsed(curve);
  const voltageSeries = pulsed
    ? [
        timeSeries(curve, pickLoadedVoltage, unit, t0, 'loaded', VOLTAGE_COLOUR, true),
        timeSeries(curve, pickRestingVoltage, unit, t0, 'at rest', REST_COLOUR, false),
      ]
    : [timeSeries(curve, pickVoltage, unit, t0, 'voltage', VOLTAGE_COLOUR, true)];
  return [
    linePlot({
      id: 'voltage-time',
      title: pulsed
        ? 'Voltage against time, loaded and at rest (shaded: lowest to highest reading)'
        : 'Voltage against time (shaded: lowest to highest reading)',
      x,
      y: { label: 'voltage (V)' },
      series: voltageSeries,
      ...(cutoffV !== null
        ? { rules: [{ y: cutoffV, label: `cutoff ${cutoffV.toFixed(3)} V`, color: RULE_COLOUR }] }
        : {}),
      height: 240,
    }),
    linePlot({
      id: 'current-time',
      title: 'Current against time (shaded: lowest to highest reading)',
      x,
      y: { label: 'current (A)', min: 0 },
      series: [
        timeSeries(
          curve,
          pulsed ? pickLoadedCurrent : pickCurrent,
          unit,
          t0,
          pulsed ? 'current while loaded' : 'current',
          CURRENT_COLOUR,
          true,
        ),
      ],
      height: 240,
    }),
    linePlot({
      id: 'temperature-time',
      title: 'Cell temperature against time (dashed: limit)',
      x,
      y: { label: 'temperature (°C)', minSpan: 4 },
      series: [temp],
      // The limit is drawn, and kept in view, so the margin to it can be read off.
      ...(maxTemperatureC !== null
        ? {
            rules: [
              { y: maxTemperatureC, label: `limit ${maxTemperatureC} °C`, color: RULE_COLOUR },
            ],
          }
        : {}),
      height: 240,
    }),
  ].join('\n');
}

/** Loaded voltage of several runs against time since each one's start. */
export function overlayVoltageTime(
  runs: Array<{ curve: readonly CurveBucket[]; name: string; color: string }>,
): string {
  const longest = Math.max(0, ...runs.map((r) => spanOf(r.curve).t1 - spanOf(r.curve).t0));
  const unit = timeUnitFor(longest);
  return linePlot({
    id: 'overlay-voltage-time',
    title: 'Voltage against time, all runs',
    x: { label: `time since each run's start (${unit.name})`, min: 0 },
    y: { label: 'voltage (V)' },
    series: runs.map((r) =>
      timeSeries(r.curve, pickVoltage, unit, spanOf(r.curve).t0, r.name, r.color, false),
    ),
  });
}
