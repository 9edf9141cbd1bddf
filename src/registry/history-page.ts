/**
 * A cell's history as one self-contained HTML page: capacity and DC resistance over time with
 * error bars (expanded uncertainty, k = 2), the fitted fade and the 80 % line, and every run in a
 * table. Offline: inline SVG, no scripts.
 */
import { page, section } from '../report/html-page.js';
import { cell as td, esc, num, sig } from '../report/html-text.js';
import { linePlot, type PlotSeries } from '../report/svg-plot.js';
import type { CellGrade } from './grading.js';
import { END_OF_LIFE_SHARE, type CellHistory } from './history.js';

const YEAR_MS = 365.25 * 86_400_000;
const CAPACITY = '#0f766e';
const DOUBTFUL = '#9ca3af';
const FIT = '#b45309';
const RESISTANCE = '#4338ca';
const RULE = '#991b1b';

/** Calendar year with its fraction, the plots' x axis. */
const year = (ms: number): number => 1970 + ms / YEAR_MS;
export const isoDate = (ms: number): string => new Date(ms).toISOString().slice(0, 10);

function capacityPlot(h: CellHistory): string {
  const trusted = h.rows.filter((r) => r.doubts.length === 0);
  const doubtful = h.rows.filter((r) => r.doubts.length > 0);
  const bars = (rows: typeof h.rows): Array<[number, number, number]> =>
    rows
      .filter((r) => r.run.capacity_u_Ah !== null)
      .map((r) => [
        year(r.run.started_ms),
        r.run.capacity_Ah - 2 * r.run.capacity_u_Ah!,
        r.run.capacity_Ah + 2 * r.run.capacity_u_Ah!,
      ]);
  const series: PlotSeries[] = [
    {
      name: 'runs that count',
      color: CAPACITY,
      points: trusted.map((r) => [year(r.run.started_ms), r.run.capacity_Ah]),
      errorBars: bars(trusted),
      markers: true,
      line: false,
    },
  ];
  if (doubtful.length > 0)
    series.push({
      name: 'runs left out',
      color: DOUBTFUL,
      points: doubtful.map((r) => [year(r.run.started_ms), r.run.capacity_Ah]),
      errorBars: bars(doubtful),
      markers: true,
      line: false,
    });
  const f = h.fade;
  if (f !== null) {
    const end =
      h.endOfLife.kind === 'projected'
        ? Math.max(h.endOfLife.date_ms, f.origin_ms + f.span_years * YEAR_MS)
        : f.origin_ms + f.span_years * YEAR_MS;
    const at = (ms: number): number =>
      f.intercept_Ah + f.per_year_Ah * ((ms - f.origin_ms) / YEAR_MS);
    series.push({
      name: 'fitted fade',
      color: FIT,
      points: [
        [year(f.origin_ms), at(f.origin_ms)],
        [year(end), at(end)],
      ],
    });
  }
  const rated = h.cell?.rated_Ah;
  return linePlot({
    id: 'capacity',
    title: 'Capacity at each run (bars: expanded uncertainty, k = 2)',
    x: { label: 'year', minSpan: 0.2 },
    y: { label: 'capacity, Ah', minSpan: 0.05 },
    series,
    rules:
      rated === undefined
        ? []
        : [
            { y: rated, label: 'rated', color: '#5b6675' },
            { y: END_OF_LIFE_SHARE * rated, label: '80 % of rated', color: RULE },
          ],
  });
}

function resistancePlot(h: CellHistory): string {
  const rows = h.rows.filter((r) => r.run.dc_resistance_ohm !== null);
  return linePlot({
    id: 'resistance',
    title: 'DC internal resistance at each run',
    x: { label: 'year', minSpan: 0.2 },
    y: { label: 'DC resistance, mΩ', minSpan: 2 },
    series: [
      {
        name: 'DC resistance',
        color: RESISTANCE,
        points: rows.map((r) => [year(r.run.started_ms), r.run.dc_resistance_ohm! * 1000]),
        markers: true,
      },
    ],
  });
}

function summary(h: CellHistory, grade: CellGrade | null): string {
  const items: string[] = [];
  const c = h.cell;
  items.push(
    c === null
      ? '<li>This cell id is not registered: no rated capacity, so no state of health.</li>'
      : `<li>${esc(c.chemistry)}, rated ${num(c.rated_Ah, 3)} Ah${c.source ? `, from ${esc(c.source)}` : ''}${c.notes ? ` — ${esc(c.notes)}` : ''}</li>`,
  );
  items.push(
    `<li>${h.rows.length} run(s), ${h.rows.filter((r) => r.doubts.length === 0).length} that count for grading and fade</li>`,
  );
  if (grade !== null)
    items.push(
      `<li>Grade: <strong>${esc(grade.status === 'graded' ? grade.grade : grade.status)}</strong>${grade.status === 'ungraded' ? ` (${esc(grade.reason)})` : grade.status === 'recycle' ? ` (${esc(grade.why)})` : ''}</li>`,
    );
  const f = h.fade;
  items.push(
    f === null
      ? `<li>No fade fit: ${esc(h.fadeNote ?? '')}.</li>`
      : `<li>Fade: ${num(f.per_year_Ah * 1000, 1)} ± ${num(2 * f.u_per_year_Ah * 1000, 1)} mAh per year${f.per_year_share === null ? '' : ` (${num(f.per_year_share * 100, 2)} ± ${num(2 * f.u_per_year_share! * 100, 2)} % of rated per year)`}, k = 2, from ${f.runs} runs over ${num(f.span_years, 2)} years, each weighted by its uncertainty.</li>`,
  );
  const e = h.endOfLife;
  items.push(
    e.kind === 'projected'
      ? `<li>80 % of rated capacity (a common end-of-life mark): ${e.reached ? 'reached, by the fitted line, on' : 'projected for'} ${isoDate(e.date_ms)} ± ${num(2 * e.u_days, 0)} days (k = 2).</li>`
      : `<li>No projected end of life: ${esc(e.why)}.</li>`,
  );
  return `<ul>${items.join('\n')}</ul>`;
}

function runTable(h: CellHistory): string {
  const head =
    '<thead><tr><th>started</th><th>run folder</th><th>end</th><th>capacity, Ah (± k = 2)</th><th>state of health</th><th>energy, Wh</th><th>DC resistance, mΩ</th><th>mean / end V</th><th>C-rate</th><th>°C</th><th>calibration</th><th>left out because</th></tr></thead>';
  const rows = h.rows.map(({ run: r, soh, c_rate, doubts }) => {
    const u = r.capacity_u_Ah === null ? '—' : num(2 * r.capacity_u_Ah, 4);
    return `<tr${doubts.length > 0 ? ' class="alarm"' : ''}><td>${esc(r.started_wall.slice(0, 16).replace('T', ' '))}</td><td>${esc(r.folder)}</td><td>${esc(r.end_reason)}</td>${td('capacity_Ah', r.capacity_Ah, `${num(r.capacity_Ah, 4)} ± ${u}`)}${td('soh', soh, soh === null ? '—' : `${num(soh * 100, 1)} %`)}${td('energy_Wh', r.energy_Wh, num(r.energy_Wh, 3))}${td('dc_resistance_ohm', r.dc_resistance_ohm, r.dc_resistance_ohm === null ? '—' : num(r.dc_resistance_ohm * 1000, 1))}<td>${num(r.mean_voltage_V, 3)} / ${num(r.end_voltage_V, 3)}</td>${td('c_rate', c_rate, sig(c_rate, 2))}${td('temperature_C', r.temperature_C, num(r.temperature_C, 1))}<td>${esc(r.calibration_id)}</td><td>${esc(doubts.join(', '))}</td></tr>`;
  });
  return `<table>${head}<tbody>${rows.join('\n')}</tbody></table>`;
}

/** Each program run's cycles: the capacity of every full discharge, with its uncertainty. */
function cycleTables(h: CellHistory): string {
  const programs = h.rows.filter((r) => r.run.cycles !== undefined);
  if (programs.length === 0) return '';
  const head =
    '<thead><tr><th>cycle</th><th>capacity, Ah (± k = 2)</th><th>of the first cycle</th><th>energy, Wh</th><th>mean current, A</th></tr></thead>';
  const tables = programs.map(({ run }) => {
    const rows = (run.cycles ?? []).map((c) => {
      const u = c.capacity_u_Ah === null ? '—' : num(2 * c.capacity_u_Ah, 4);
      return `<tr><td>${c.cycle}</td>${td('capacity_Ah', c.capacity_Ah, `${num(c.capacity_Ah, 4)} ± ${u}`)}${td('of_first', c.of_first, c.of_first === null ? '—' : `${num(c.of_first * 100, 1)} %`)}${td('energy_Wh', c.energy_Wh, num(c.energy_Wh, 3))}${td('mean_current_A', c.mean_current_A, num(c.mean_current_A, 3))}</tr>`;
    });
    const caption = `Run started ${esc(run.started_wall.slice(0, 16).replace('T', ' '))} (${esc(run.folder)}), ended ${esc(run.end_reason)}: ${run.cycles?.length ?? 0} full cycle(s)`;
    return `<table><caption>${caption}</caption>${head}<tbody>${rows.join('\n')}</tbody></table>`;
  });
  return section(
    'cycles',
    'Cycles of program runs',
    `<p>A program run's own figure in the plots and tables above is its latest full cycle's; grading and fade count each run once.</p>\n${tables.join('\n')}`,
  );
}

export function historyPage(h: CellHistory, grade: CellGrade | null, generatedAt: string): string {
  const body = [
    `<h1>Cell ${esc(h.cell_id)}</h1>`,
    '<p class="sub">Every run of this cell filed in the registry; the run folders hold the raw counts.</p>',
    section('summary', 'Summary', summary(h, grade)),
    section('capacity', 'Capacity over time', capacityPlot(h)),
    section('resistance', 'DC internal resistance over time', resistancePlot(h)),
    section('runs', 'Runs', runTable(h)),
    cycleTables(h),
  ]
    .filter((s) => s !== '')
    .join('\n');
  return page(`Cell ${h.cell_id}: history`, body, generatedAt);
}
