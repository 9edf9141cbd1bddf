/**
 * report.html of one run: figures with their uncertainty, plots, capacity by voltage, DC
 * internal resistance, the verdict where a method applies, the uncertainty budget, the
 * calibration, frame statistics, events and cautions. Self-contained: inline style and SVG.
 */
import { basename } from 'node:path';
import type { FigureUncertainty } from '../results/uncertainty.js';
import { cautionLines } from '../chemistry/cautions.js';
import type { ResistanceMethod, ResistanceSummary } from './dc-resistance.js';
import { page, section, VOLTAGE_COLOUR } from './html-page.js';
import { programSection } from './html-cycles.js';
import { eventRowHtml, eventRows } from './html-events.js';
import { cell, esc, hms, localTime, num, sig } from './html-text.js';
import type { RunFigures } from './recompute.js';
import { timePlots, voltageChargePlot, voltageChargeSeries } from './run-plots.js';
import type { Verdict } from './verdicts.js';

export interface RenderOptions {
  /** ISO time written in the footer. @default now */
  generatedAt?: string;
  /** The result file written alongside, named in the page. */
  resultFile?: string;
}

const ah = (x: number | null): string =>
  x === null
    ? '—'
    : Math.abs(x) < 10
      ? `${x.toFixed(4)} Ah (${(x * 1000).toFixed(1)} mAh)`
      : `${x.toFixed(3)} Ah`;

/** End reasons that are safety limits, in words. */
const SAFETY_WORDS: Record<string, string> = {
  over_temperature: 'the cell passed its temperature limit',
  link_lost: 'the link to the rig was lost',
  fault: 'a rig or sensor fault',
};

export function figuresTable(f: RunFigures): string {
  const r = f.result;
  const uq = r.uncertainty.capacity_Ah;
  const ue = r.uncertainty.energy_Wh;
  const rel = (u: FigureUncertainty, x: number): string =>
    x !== 0 ? ` (${((u.expanded / Math.abs(x)) * 100).toFixed(2)} %)` : '';
  const safety = r.end_reason in SAFETY_WORDS;
  const rows: string[] = [
    `<tr><th>Capacity</th>${cell('capacity_Ah', r.capacity_Ah, ah(r.capacity_Ah))}${cell('uncertainty.capacity_Ah.expanded', uq.expanded, `± ${uq.expanded.toFixed(4)} Ah${rel(uq, r.capacity_Ah)}, k = 2`)}</tr>`,
    `<tr><th>Energy</th>${cell('energy_Wh', r.energy_Wh, `${r.energy_Wh.toFixed(4)} Wh`)}${cell('uncertainty.energy_Wh.expanded', ue.expanded, `± ${ue.expanded.toFixed(4)} Wh${rel(ue, r.energy_Wh)}, k = 2`)}</tr>`,
    `<tr><th>Load-on time</th>${cell('duration_s', r.duration_s, hms(r.duration_s))}<td class="small">${num(r.duration_s / 3600, 3)} h</td></tr>`,
    ...(r.schedule !== null
      ? [
          `<tr><th>Service output</th>${cell('service_output_h', r.service_output_h, r.service_output_h === null ? '—' : `${r.service_output_h.toFixed(2)} h`)}<td class="small">load-on hours to the end point; schedule: ${esc(r.schedule)}</td></tr>`,
        ]
      : []),
    `<tr><th>Mean voltage</th>${cell('mean_voltage_V', r.mean_voltage_V, `${num(r.mean_voltage_V, 3)} V`)}<td class="small">energy ÷ charge</td></tr>`,
    `<tr><th>Mid-point voltage</th>${cell('midpoint_voltage_V', r.midpoint_voltage_V, `${num(r.midpoint_voltage_V, 3)} V`)}<td class="small">loaded voltage at half the charge delivered</td></tr>`,
    `<tr><th>End voltage</th>${cell('end_voltage_V', r.end_voltage_V, `${num(r.end_voltage_V, 3)} V`)}<td class="small">last loaded reading; cutoff ${num(r.cutoff_V, 3)} V (${num(r.cutoff_V / f.manifest.cells, 3)} V per cell)</td></tr>`,
    `<tr><th>Average current</th>${cell('average_current_A', r.average_current_A, `${num(r.average_current_A, 4)} A`)}<td class="small">charge ÷ load-on time; loaded range ${num(f.current.minA, 3)} to ${num(f.current.maxA, 3)} A</td></tr>`,
    `<tr><th>C-rate</th>${cell('c_rate', r.c_rate, r.c_rate === null ? '—' : `${r.c_rate.toFixed(3)} C`)}<td class="small">${r.rated_Ah === null ? 'give --rated <Ah> for the C-rate and the share of the rating' : `average current ÷ rated ${r.rated_Ah} Ah per hour (It = ${r.rated_Ah} A)`}</td></tr>`,
    `<tr><th>Share of the rating</th>${cell('percent_of_rated', r.percent_of_rated, r.percent_of_rated === null ? '—' : `${r.percent_of_rated.toFixed(1)} %`)}<td class="small">${r.rated_Ah === null ? '' : `of ${r.rated_Ah} Ah`}</td></tr>`,
    `<tr><th>Open-circuit voltage</th>${cell('open_circuit_V', r.open_circuit_V, `${num(r.open_circuit_V, 3)} V`)}<td class="small">at rest just before the load went on</td></tr>`,
    `<tr><th>DC internal resistance</th>${cell('dc_resistance_ohm', r.dc_resistance_ohm, r.dc_resistance_ohm === null ? '—' : `${(r.dc_resistance_ohm * 1000).toFixed(1)} mΩ`)}<td class="small">at switch-on: (U_open − U_load) ÷ I_load</td></tr>`,
    `<tr><th>Cell temperature</th>${cell('temperature_max_C', f.temperature.maxC, `${num(f.temperature.startC, 1)} °C at the start, ${num(f.temperature.maxC, 1)} °C at most`)}<td class="small">limit ${f.manifest.limits.max_temperature_C} °C</td></tr>`,
    `<tr${safety ? ' class="safety-end"' : ''}><th>How it ended</th><td data-key="end_reason">${esc(r.end_reason)}</td><td class="small">${esc(r.end_detail)}</td></tr>`,
  ];
  const banner = safety
    ? `<div class="box safety-end" data-end="safety"><div class="label">Ended on a safety limit</div><p><strong>${esc(SAFETY_WORDS[r.end_reason] ?? r.end_reason)}</strong>: ${esc(r.end_detail)}. The figures below stop where the load was cut; check the cell, the wiring and the rig before another run.</p></div>`
    : '';
  return `${banner}<div class="scroll"><table class="figures"><tbody>\n${rows.join('\n')}\n</tbody></table></div>`;
}

function verdictBox(v: Verdict | null, chemistry: string): string {
  if (!v)
    return `<p class="small">No rated-capacity method is checked for ${esc(chemistry)} cells.</p>`;
  return `<div class="box ${v.outcome}" data-verdict="${v.outcome}">
<div class="label">${esc(v.label)}</div>
<p><strong>${esc(v.summary)}</strong></p>
<p class="small">Method: ${esc(v.method)}.</p>
<ul>${v.reasons.map((x) => `<li>${esc(x)}</li>`).join('')}</ul>
${v.cautions.length ? `<p class="small">${v.cautions.map(esc).join(' ')}</p>` : ''}
</div>`;
}

function stepsTable(f: RunFigures): string {
  const total = f.result.capacity_Ah;
  const rated = f.result.rated_Ah;
  const head = `<thead><tr><th>down to (V per cell)</th><th>down to (V)</th><th>capacity (Ah)</th><th>energy (Wh)</th><th>${rated === null ? 'share of this run' : 'share of the rating'}</th><th>load-on time</th></tr></thead>`;
  // The values of the result file, so that the page and the file agree to the last digit.
  const reached = f.result.capacity_by_voltage.filter((s) => s.capacity_Ah !== null);
  const unreached = f.result.capacity_by_voltage.length - reached.length;
  const rows = reached.map((s) => {
    const share = s.capacity_Ah === null ? null : (s.capacity_Ah / (rated ?? total)) * 100;
    return `<tr>${cell('step.V_per_cell', s.V_per_cell, s.V_per_cell.toFixed(3))}${cell('step.V', s.V, s.V.toFixed(3))}${cell('step.capacity_Ah', s.capacity_Ah, s.capacity_Ah === null ? 'not reached' : s.capacity_Ah.toFixed(4))}${cell('step.energy_Wh', s.energy_Wh, num(s.energy_Wh, 4))}<td class="num">${share === null ? '—' : `${share.toFixed(1)} %`}</td><td class="num">${hms(s.load_on_s)}</td></tr>`;
  });
  rows.push(
    `<tr class="total"><th colspan="2">whole run (to ${num(f.result.end_voltage_V, 3)} V)</th>${cell('capacity_Ah', total, total.toFixed(4))}${cell('energy_Wh', f.result.energy_Wh, f.result.energy_Wh.toFixed(4))}<td class="num">${rated === null ? '100 %' : `${num(f.result.percent_of_rated, 1)} %`}</td><td class="num">${hms(f.result.duration_s)}</td></tr>`,
  );
  return `<table class="steps" data-table="capacity-by-voltage">${head}<tbody>\n${rows.join('\n')}\n</tbody></table>
${unreached > 0 ? `<p class="small">${unreached} lower step${unreached > 1 ? 's were' : ' was'} not reached before the run ended.</p>` : ''}
<p class="small">A step counts as passed when the loaded voltage has stayed below it for three loaded frames in a row; the figures are those at the first of them. Steps every ${f.stepPerCellV} V per cell.</p>`;
}

const METHOD_NAMES: Record<ResistanceMethod, string> = {
  switch_on: 'load switched on: (U_open − U_load) ÷ I_load',
  switch_off: 'load switched off, recovery: (U_recovered − U_load) ÷ I_load',
  two_level: 'two load levels: (U1 − U2) ÷ (I2 − I1)',
};

function resistanceTable(r: ResistanceSummary, intervalS: number | null): string {
  const methods = (Object.keys(METHOD_NAMES) as ResistanceMethod[]).filter((m) => r[m]);
  if (methods.length === 0)
    return '<p class="small">The run has no load step to read a resistance from.</p>';
  const rows = methods.map((m) => {
    const s = r[m]!;
    const fr = s.first;
    return `<tr><td>${esc(METHOD_NAMES[m])}</td><td class="num">${s.count}</td>${cell(`dc_resistance.${m}.first_ohm`, fr.ohm, `${(fr.ohm * 1000).toFixed(1)} mΩ`)}<td class="num">${(s.meanOhm * 1000).toFixed(1)} mΩ</td><td class="num">${(s.minOhm * 1000).toFixed(1)} to ${(s.maxOhm * 1000).toFixed(1)} mΩ</td><td class="small">first: ${fr.uBeforeV.toFixed(4)} V → ${fr.uAfterV.toFixed(4)} V at ${fr.iBeforeA === fr.iAfterA ? `${fr.iAfterA.toFixed(4)} A` : `${fr.iBeforeA.toFixed(4)} → ${fr.iAfterA.toFixed(4)} A`}</td></tr>`;
  });
  return `<table data-table="dc-resistance"><thead><tr><th>method</th><th>readings</th><th>first</th><th>mean</th><th>range</th><th>first reading</th></tr></thead><tbody>\n${rows.join('\n')}\n</tbody></table>
<p class="small">Each reading takes the first frame after the step, about ${intervalS === null ? 'one frame period' : `${(intervalS * 1000).toFixed(0)} ms`} after it: the ohmic drop plus what polarisation built up in that time. The two-level method (IEC 61951-2, IEC 61960-3) reads U1 at the end of the lower current I1 and U2 one second into the higher current I2.</p>`;
}

export function budgetTable(
  title: string,
  unit: string,
  u: FigureUncertainty,
  value: number,
): string {
  const total = u.standard ** 2 || 1;
  const rows = u.terms.map(
    (t) =>
      `<tr><td>${esc(t.name)}</td><td>${t.type}</td><td class="small">${esc(t.basis)}</td><td>${t.over_run === 'correlated' ? 'adds linearly' : 'averages down'}</td>${cell(`budget.${unit}`, t.u, sig(t.u, 3))}<td class="num">${((t.u ** 2 / total) * 100).toFixed(1)} %</td></tr>`,
  );
  rows.push(
    `<tr class="total"><th colspan="4">combined standard uncertainty u_c</th>${cell(`budget.${unit}.standard`, u.standard, sig(u.standard, 3))}<td class="num">100 %</td></tr>`,
  );
  rows.push(
    `<tr class="total"><th colspan="4">expanded uncertainty U = k · u_c, k = ${u.k}</th>${cell(`budget.${unit}.expanded`, u.expanded, sig(u.expanded, 3))}<td class="num">${value !== 0 ? `${((u.expanded / Math.abs(value)) * 100).toFixed(2)} % of the value` : ''}</td></tr>`,
  );
  return `<h3>${esc(title)}</h3>
<table data-table="budget-${esc(unit)}"><thead><tr><th>source</th><th>type</th><th>evaluated as</th><th>over the run</th><th>u (${esc(unit)})</th><th>share of u_c²</th></tr></thead><tbody>
${rows.join('\n')}
</tbody></table>`;
}

function uncertaintySection(f: RunFigures): string {
  const r = f.result;
  return `<p>The budget follows the GUM (JCGM 100:2008): each source's standard uncertainty is propagated to the figure and the contributions are combined in quadrature (5.1.2); limits known only as ±a are taken as rectangular, u = a/√3 (4.3.7). Sources common to every sample (the calibration, the reference meter, the host clock) add linearly over the run; independent per-sample noise and rounding average down with the number of samples. The expanded uncertainty uses k = 2 (about 95 % coverage for a near-normal result). Basis: ${esc(r.uncertainty.capacity_Ah.basis)}.</p>
${budgetTable('Capacity', 'Ah', r.uncertainty.capacity_Ah, r.capacity_Ah)}
${budgetTable('Energy', 'Wh', r.uncertainty.energy_Wh, r.energy_Wh)}`;
}

function calibrationSection(f: RunFigures): string {
  const c = f.calibration;
  const cal = c.applied;
  if (!cal) {
    return `<p data-key="calibration_id" data-value="none">No calibration${c.own ? ' (the run was recorded without one)' : ''}: figures use the nominal analog chain of the rig profile, whose offset and gain errors are unknown, and the uncertainty budget assumes the errors of an uncalibrated board. Recompute with <code>cellvigil report &lt;run&gt; --calibration &lt;file&gt;</code> once the rig is calibrated.</p>`;
  }
  const rows = (['voltage', 'current', 'temperature'] as const).flatMap((q) => {
    const qc = cal[q];
    if (!qc) return [];
    const fit = qc.fit;
    return [
      `<tr><td>${q}</td><td>${fit.model === 'offset' ? 'offset only' : 'gain and offset'}</td><td class="num">${sig(fit.gain, 7)} ± ${sig(fit.u_gain, 2)}</td><td class="num">${sig(fit.offset, 4)} ± ${sig(fit.u_offset, 2)}</td><td class="num">${sig(fit.residual_sd, 2)}</td><td class="num">${qc.points.length}</td></tr>`,
    ];
  });
  const whose = c.own
    ? "the run's own calibration (the one in force when it was recorded)"
    : `another calibration than the live run's (${f.manifest.calibration.id})`;
  return `<p data-key="calibration_id" data-value="${esc(cal.id)}">Calibration <strong>${esc(cal.id)}</strong>: ${esc(whose)}${c.file ? `, from ${esc(c.file)}` : ''}. Made ${esc(cal.date)} for the rig “${esc(cal.rig)}” against ${esc(cal.reference_instrument)}.</p>
<table data-table="calibration"><thead><tr><th>quantity</th><th>model</th><th>gain ± u</th><th>offset ± u</th><th>residual s</th><th>points</th></tr></thead><tbody>
${rows.join('\n')}
</tbody></table>`;
}

function framesSection(f: RunFigures): string {
  const fr = f.frames;
  const ppm = f.clock.errorPpm;
  const clock =
    ppm === null
      ? 'too short a run to estimate'
      : `${ppm > 0 ? '+' : ''}${ppm} ppm (${(ppm / 1e4).toFixed(2)} %, ${ppm >= 0 ? 'fast' : 'slow'})${f.clock.warning ? ' — more than 1 %' : ''}`;
  return `<table data-table="frames"><tbody>
<tr><th>frames accepted</th>${cell('frames_accepted', fr.accepted, String(fr.accepted))}<td class="small">${fr.loadedFrames} with the load on</td></tr>
<tr><th>lines rejected</th>${cell('frames_rejected', fr.rejected, String(fr.rejected))}<td class="small">bad checksum, wrong field count or out-of-range values; never integrated</td></tr>
<tr><th>frames lost</th>${cell('frames_lost', fr.lost, String(fr.lost))}<td class="small">gaps in the sequence numbers; the trapezoid bridges them</td></tr>
<tr><th>long gaps</th>${cell('gaps', fr.gaps, String(fr.gaps))}<td class="small">more than 2 s between frames${fr.rigRestarts ? `; ${fr.rigRestarts} rig restart${fr.rigRestarts > 1 ? 's' : ''}` : ''}; their charge is counted as doubt in the budget</td></tr>
<tr><th>reading noise</th>${cell('current_noise_A', f.current.noiseA, f.current.noiseA === null ? '—' : `current ${(f.current.noiseA * 1000).toPrecision(2)} mA, voltage ${f.voltageNoiseV === null ? '—' : `${(f.voltageNoiseV * 1000).toPrecision(2)} mV`}`)}<td class="small">standard deviation of one loaded reading, from the differences of consecutive readings; it averages down in the figures</td></tr>
<tr><th>mean frame interval</th>${cell('frame_interval_s', fr.meanIntervalS, fr.meanIntervalS === null ? '—' : `${(fr.meanIntervalS * 1000).toFixed(1)} ms`)}<td class="small">host clock</td></tr>
<tr><th>rig clock error</th>${cell('rig_clock_error_ppm', ppm, clock)}<td class="small">the rig's tick counter against the host's clock; every frame is timed by the host clock, so this error does not enter the figures</td></tr>
</tbody></table>`;
}

function eventsSection(f: RunFigures): string {
  const ev = f.events;
  const counts = Object.entries(ev.counts)
    .sort((a, b) => b[1] - a[1])
    .map(([k, v]) => `${esc(k)} ${v}`)
    .join(', ');
  if (ev.listed.length === 0) return '<p class="small">The run has no events.</p>';
  const rows = eventRows(ev.listed).map(eventRowHtml);
  return `<p class="small">By name: ${counts}.${ev.unlisted ? ` ${ev.unlisted} more (commands, the cautions and repeated rejected lines) are counted but not listed.` : ''}</p>
<p class="small">Lost frames, rejected lines and gaps are summed per minute.</p>
<div class="scroll"><table data-table="events"><thead><tr><th>time</th><th>level</th><th>event</th><th>detail</th></tr></thead><tbody>
${rows.join('\n')}
</tbody></table></div>`;
}

export function runHeading(f: RunFigures): string {
  const m = f.manifest;
  return `<h1>Discharge report: ${esc(m.label)}</h1>
<p class="sub">${esc(basename(f.folder))} · started <time datetime="${esc(m.started_wall)}">${esc(localTime(m.started_wall))}</time> · ${m.cells} × ${esc(m.chemistry.profile.name)} · rig “${esc(m.rig.profile.name ?? 'unnamed')}” · ${esc(m.source.description)} · channel ${m.channel}</p>`;
}

export function renderRunReport(f: RunFigures, o: RenderOptions = {}): string {
  const m = f.manifest;
  const body = [
    runHeading(f),
    section(
      'figures',
      'Figures',
      `${figuresTable(f)}${o.resultFile ? `<p class="small">The same figures are in ${esc(o.resultFile)}.</p>` : ''}`,
    ),
    // Only a program run has this section; a discharge's page stays as it was.
    ...(f.result.segments !== undefined || f.result.program !== undefined
      ? [programSection(f.result)]
      : []),
    section('verdict', 'Against the rating', verdictBox(f.verdict, m.chemistry.profile.name)),
    section(
      'plots',
      'Plots',
      `${voltageChargePlot([voltageChargeSeries(f.curve, 'loaded voltage', VOLTAGE_COLOUR)], f.result.cutoff_V)}\n${timePlots(f.curve, f.result.cutoff_V, m.limits.max_temperature_C)}`,
    ),
    section('capacity-by-voltage', 'Capacity and energy down to each voltage', stepsTable(f)),
    section(
      'dc-resistance',
      'DC internal resistance',
      resistanceTable(f.resistance, f.frames.meanIntervalS),
    ),
    section('uncertainty', 'Uncertainty budget', uncertaintySection(f)),
    section('calibration', 'Calibration', calibrationSection(f)),
    section('frames', 'Frames and the rig clock', framesSection(f)),
    section('events', 'Events and alarms', eventsSection(f)),
    section(
      'cautions',
      'Cautions',
      `<ul>${cautionLines(m.chemistry.profile)
        .map((c) => `<li>${esc(c)}</li>`)
        .join('')}</ul>`,
    ),
    f.notes.length
      ? section(
          'notes',
          'Notes on this recompute',
          `<ul>${f.notes.map((n) => `<li>${esc(n)}</li>`).join('')}</ul>`,
        )
      : '',
  ].join('\n');
  return page(`Discharge report: ${m.label}`, body, o.generatedAt ?? new Date().toISOString());
}
