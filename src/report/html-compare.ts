/**
 * One page comparing several runs: their curves overlaid, their figures side by side, and
 * Peukert's exponent when they were run at different currents.
 */
import { basename } from 'node:path';
import { page, RUN_COLOURS, section } from './html-page.js';
import { cell, esc, hms, localTime, num } from './html-text.js';
import {
  currentsDiffer,
  fitPeukert,
  peukertHours,
  selectPeukertRuns,
  type PeukertCandidate,
  type PeukertFit,
} from './peukert.js';
import type { RunFigures } from './recompute.js';
import { overlayVoltageTime, voltageChargePlot, voltageChargeSeries } from './run-plots.js';
import type { RenderOptions } from './html.js';

/** Each run's name in the legend and table: its folder name. */
const nameOf = (f: RunFigures): string => basename(f.folder);

/** Every run as a Peukert candidate: mean current, load-on hours and what kind of cell it was. */
export function peukertCandidates(runs: readonly RunFigures[]): PeukertCandidate[] {
  return runs
    .filter((f) => f.result.average_current_A !== null)
    .map((f) => ({
      currentA: f.result.average_current_A!,
      hours: f.result.duration_s / 3600,
      name: nameOf(f),
      chemistry: f.manifest.chemistry.id,
      cells: f.manifest.cells,
      ratedAh: f.result.rated_Ah,
      capacityAh: f.result.capacity_Ah,
      endReason: f.result.end_reason,
    }));
}

function figuresTable(runs: readonly RunFigures[]): string {
  const rows = runs.map((f, i) => {
    const r = f.result;
    return `<tr><td><span style="color:${RUN_COLOURS[i % RUN_COLOURS.length]}">■</span> ${esc(nameOf(f))}</td><td>${esc(localTime(f.manifest.started_wall))}</td>${cell('capacity_Ah', r.capacity_Ah, r.capacity_Ah.toFixed(4))}${cell('uncertainty.capacity_Ah.expanded', r.uncertainty.capacity_Ah.expanded, `± ${r.uncertainty.capacity_Ah.expanded.toFixed(4)}`)}${cell('energy_Wh', r.energy_Wh, r.energy_Wh.toFixed(4))}${cell('duration_s', r.duration_s, hms(r.duration_s))}${cell('average_current_A', r.average_current_A, num(r.average_current_A, 4))}${cell('mean_voltage_V', r.mean_voltage_V, num(r.mean_voltage_V, 3))}${cell('midpoint_voltage_V', r.midpoint_voltage_V, num(r.midpoint_voltage_V, 3))}${cell('dc_resistance_ohm', r.dc_resistance_ohm, r.dc_resistance_ohm === null ? '—' : (r.dc_resistance_ohm * 1000).toFixed(1))}${cell('temperature_max_C', f.temperature.maxC, num(f.temperature.maxC, 1))}<td>${esc(r.end_reason)}</td><td>${esc(r.calibration_id)}</td></tr>`;
  });
  return `<div class="scroll"><table data-table="runs"><thead><tr><th>run</th><th>date</th><th>capacity (Ah)</th><th>U, k = 2 (Ah)</th><th>energy (Wh)</th><th>load-on</th><th>mean I (A)</th><th>mean V</th><th>mid-point V</th><th>R_dc (mΩ)</th><th>max °C</th><th>ended</th><th>calibration</th></tr></thead><tbody>
${rows.join('\n')}
</tbody></table></div>`;
}

function peukertSection(runs: readonly RunFigures[]): string {
  const { used: pts, excluded, group } = selectPeukertRuns(peukertCandidates(runs));
  const left = excluded.length
    ? `<p class="small" data-peukert="excluded">Left out of the fit: ${excluded.map((x) => `${esc(x.name)} (${esc(x.why)})`).join('; ')}. One Peukert law describes one kind of cell: runs of the same cell, or of one chemistry and rated capacity.</p>`
    : '';
  if (!currentsDiffer(pts)) {
    return `<p class="small" data-peukert="none">Peukert's exponent needs two or more runs of one kind of cell${group ? ` (here ${esc(group)})` : ''}, each to its cutoff, at currents more than 10 % apart; these runs do not have them.</p>${left}`;
  }
  const fit: PeukertFit = fitPeukert(pts);
  const rows = pts.map(
    (p) =>
      `<tr><td>${esc(p.name)}</td><td class="num">${p.currentA.toFixed(4)}</td><td class="num">${p.hours.toFixed(3)}</td><td class="num">${peukertHours(fit.rateHours, fit.capacityAh, fit.k, p.currentA).toFixed(3)}</td></tr>`,
  );
  return `<p>Peukert's law, t = H·(C/(I·H))<sup>k</sup>, fitted to the ${fit.runs} runs of ${esc(group ?? '')} that reached their cutoff:
<strong data-key="peukert_k" data-value="${fit.k}">k = ${fit.k.toFixed(3)}</strong>${fit.uK !== null ? ` ± ${fit.uK.toFixed(3)} (standard uncertainty from the scatter)` : ' (two runs: no scatter to judge it by)'}, with C = ${fit.capacityAh.toFixed(4)} Ah at the ${fit.rateHours}-hour rate.</p>
<p class="small">The fit holds between ${fit.currentRangeA[0].toFixed(3)} A and ${fit.currentRangeA[1].toFixed(3)} A; the law assumes constant current, and each run's mean current stands in for it. Compare only runs of one cell (or one batch) to the same end voltage.</p>
${left}
<table data-table="peukert"><thead><tr><th>run</th><th>mean current (A)</th><th>measured (h)</th><th>fitted (h)</th></tr></thead><tbody>
${rows.join('\n')}
</tbody></table>`;
}

export function renderComparisonReport(runs: readonly RunFigures[], o: RenderOptions = {}): string {
  const named = runs.map((f, i) => ({
    f,
    name: nameOf(f),
    color: RUN_COLOURS[i % RUN_COLOURS.length]!,
  }));
  const cutoffs = new Set(runs.map((f) => f.result.cutoff_V));
  const body = [
    `<h1>Discharge runs compared</h1>\n<p class="sub">${runs.length} runs: ${named.map((n) => esc(n.name)).join(', ')}</p>`,
    section('figures', 'Figures', figuresTable(runs)),
    section(
      'plots',
      'Curves',
      `${voltageChargePlot(
        named.map((n) => voltageChargeSeries(n.f.curve, n.name, n.color)),
        cutoffs.size === 1 ? [...cutoffs][0]! : null,
      )}\n${overlayVoltageTime(named.map((n) => ({ curve: n.f.curve, name: n.name, color: n.color })))}`,
    ),
    section('peukert', "Peukert's exponent", peukertSection(runs)),
  ].join('\n');
  return page('Discharge runs compared', body, o.generatedAt ?? new Date().toISOString());
}
