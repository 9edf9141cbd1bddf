/**
 * The program run's part of report.html: every segment (step) with what went in or out of the
 * cell, the capacity of each full cycle with its uncertainty, and the cycle-to-cycle trend. Reads
 * result.json's `program`, `segments`, `cycles` and `cycle_trend`; the fitted line of the plot
 * comes from cycle-trend.ts, as the file's trend does.
 */
import type { CycleFigures, RunResult, SegmentFigures } from '../record/result.js';
import { capacityTrend, type SegmentCapacity } from './cycle-trend.js';
import { section } from './html-page.js';
import { cell, esc, hms, num } from './html-text.js';
import { linePlot, type PlotSeries } from './svg-plot.js';

const CAPACITY = '#0f766e';
const FIT = '#b45309';

const KIND_WORDS: Record<SegmentFigures['kind'], string> = {
  charge: 'charge',
  rest: 'rest',
  discharge: 'discharge',
};

function segmentsTable(segments: readonly SegmentFigures[]): string {
  const t0 = segments[0]?.started_ms ?? 0;
  const head =
    '<thead><tr><th>#</th><th>cycle</th><th>step</th><th>kind</th><th>from</th><th>lasted</th><th>ended on</th><th>charge, Ah (± k = 2)</th><th>energy, Wh</th><th>mean current, A</th><th>end voltage, V</th></tr></thead>';
  const rows = segments.map((s) => {
    const u = s.uncertainty?.charge_Ah?.expanded;
    const charge = `${s.kind === 'charge' ? 'in ' : s.kind === 'discharge' ? 'out ' : ''}${num(s.charge_Ah, 4)}${u === undefined ? '' : ` ± ${num(u, 4)}`}`;
    const kind = `${KIND_WORDS[s.kind]}${s.purpose === 'storage' ? ' (storage)' : ''}`;
    return `<tr data-segment="${s.index}"><td class="num">${s.index}</td><td class="num">${s.cycle ?? '—'}</td><td>${esc(s.step)}</td><td>${esc(kind)}</td><td class="num">${hms((s.started_ms - t0) / 1000)}</td>${cell('segment.duration_s', s.duration_s, hms(s.duration_s))}<td>${esc(s.end_reason)}</td>${cell('segment.charge_Ah', s.charge_Ah, charge)}${cell('segment.energy_Wh', s.energy_Wh, num(s.energy_Wh, 4))}${cell('segment.mean_current_A', s.mean_current_A, num(s.mean_current_A, 4))}${cell('segment.end_voltage_V', s.end_voltage_V, num(s.end_voltage_V, 3))}</tr>`;
  });
  return `<div class="scroll"><table data-table="segments">${head}<tbody>\n${rows.join('\n')}\n</tbody></table></div>
<p class="small">Times from the start of the first step. Charge is what went into the cell while charging and out of it while discharging; each step's figures start from zero.</p>`;
}

function cyclesTable(cycles: readonly CycleFigures[]): string {
  const head =
    '<thead><tr><th>cycle</th><th>step #</th><th>capacity, Ah (± k = 2)</th><th>of the first cycle</th><th>energy, Wh (± k = 2)</th><th>mean current, A</th></tr></thead>';
  const rows = cycles.map((c) => {
    const uq = c.uncertainty?.capacity_Ah?.expanded;
    const ue = c.uncertainty?.energy_Wh?.expanded;
    return `<tr data-cycle="${c.cycle}"><td class="num">${c.cycle}</td><td class="num">${c.segment}</td>${cell('cycle.capacity_Ah', c.capacity_Ah, `${num(c.capacity_Ah, 4)}${uq === undefined ? '' : ` ± ${num(uq, 4)}`}`)}${cell('cycle.of_first', c.of_first, `${num(c.of_first * 100, 1)} %`)}${cell('cycle.energy_Wh', c.energy_Wh, `${num(c.energy_Wh, 4)}${ue === undefined ? '' : ` ± ${num(ue, 4)}`}`)}${cell('cycle.mean_current_A', c.mean_current_A, num(c.mean_current_A, 4))}</tr>`;
  });
  return `<table data-table="cycles">${head}<tbody>\n${rows.join('\n')}\n</tbody></table>`;
}

/** The file's cycles as cycle-trend.ts takes them: each one a discharge that reached its cutoff. */
function asSegments(cycles: readonly CycleFigures[]): SegmentCapacity[] {
  return cycles.map((c) => ({
    segment: {
      index: c.segment,
      kind: 'discharge',
      purpose: 'program',
      cycle: c.cycle,
      end_reason: 'cutoff',
    },
    capacityAh: c.capacity_Ah,
    ...(c.uncertainty?.capacity_Ah ? { expandedAh: c.uncertainty.capacity_Ah.expanded } : {}),
  }));
}

function cyclePlot(cycles: readonly CycleFigures[]): string {
  const bars = cycles
    .filter((c) => c.uncertainty?.capacity_Ah)
    .map((c): [number, number, number] => {
      const u = c.uncertainty.capacity_Ah.expanded;
      return [c.cycle, c.capacity_Ah - u, c.capacity_Ah + u];
    });
  const series: PlotSeries[] = [
    {
      name: 'capacity of the cycle',
      color: CAPACITY,
      points: cycles.map((c) => [c.cycle, c.capacity_Ah]),
      errorBars: bars,
      markers: true,
      line: false,
    },
  ];
  const trend = capacityTrend(asSegments(cycles));
  if (trend.slopeAhPerCycle !== null) {
    // A least-squares line passes through the mean of its points.
    const xs = trend.points.map((p) => p.cycle);
    const mx = xs.reduce((a, x) => a + x, 0) / xs.length;
    const my = trend.points.reduce((a, p) => a + p.capacityAh, 0) / xs.length;
    const at = (x: number): number => my + trend.slopeAhPerCycle! * (x - mx);
    const [x0, x1] = [Math.min(...xs), Math.max(...xs)];
    series.push({
      name: 'least-squares trend',
      color: FIT,
      points: [
        [x0, at(x0)],
        [x1, at(x1)],
      ],
    });
  }
  return linePlot({
    id: 'cycles',
    title: 'Capacity of each cycle (bars: expanded uncertainty, k = 2)',
    x: { label: 'cycle', minSpan: 1 },
    y: { label: 'capacity, Ah', minSpan: 0.01 },
    series,
  });
}

function trendText(r: RunResult, cycles: readonly CycleFigures[]): string {
  const t = r.cycle_trend;
  if (cycles.length < 2 || !t || t.slope_Ah_per_cycle === null)
    return `<p data-key="cycle_trend" data-value="">${cycles.length} full cycle${cycles.length === 1 ? '' : 's'}: a trend needs two.</p>`;
  const share = t.slope_share_per_cycle;
  const beyond =
    t.change_beyond_uncertainty === null
      ? 'the uncertainties are not known, so whether the change is real cannot be said'
      : t.change_beyond_uncertainty
        ? 'larger than the two cycles’ expanded uncertainties combined: a real change'
        : 'within the two cycles’ expanded uncertainties combined: no change shown';
  return `<p data-key="cycle_trend.slope_Ah_per_cycle" data-value="${t.slope_Ah_per_cycle}">Trend (least squares over ${cycles.length} cycles): <strong>${num(t.slope_Ah_per_cycle * 1000, 2)} mAh per cycle</strong>${share === null ? '' : ` (${num(share * 100, 3)} % of the first cycle per cycle)`}. Last cycle minus first: ${num((t.change_Ah ?? NaN) * 1000, 2)} mAh, ${beyond}.</p>`;
}

/** The program's section of report.html; empty for a run that was one discharge. */
export function programSection(r: RunResult): string {
  if (r.program === undefined && r.segments === undefined) return '';
  const segments = r.segments ?? [];
  const cycles = r.cycles ?? [];
  const last = cycles.at(-1);
  const intro = `<p>Program <strong data-key="program">${esc(r.program ?? 'unnamed')}</strong>: ${segments.length} step${segments.length === 1 ? '' : 's'}, ${cycles.length} full cycle${cycles.length === 1 ? '' : 's'} (a discharge of the program that reached its cutoff). ${last ? `The figures at the top are those of the last full cycle (cycle ${last.cycle}, step ${last.segment}).` : 'No discharge reached its cutoff, so the figures at the top are zero.'}</p>`;
  const cyclePart =
    cycles.length === 0
      ? ''
      : `<h3>Capacity per cycle</h3>\n${cyclesTable(cycles)}\n${trendText(r, cycles)}\n${cyclePlot(cycles)}`;
  return section(
    'program',
    'Program: steps and cycles',
    `${intro}\n<h3>Steps</h3>\n${segmentsTable(segments)}\n${cyclePart}`,
  );
}
