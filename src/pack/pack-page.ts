/**
 * A pack plan as CSV (one row per cell) and as a self-contained HTML page with a picture of the
 * groups: one column per series group, one box per cell shaded by its capacity.
 */
import { stringify } from 'csv-stringify/sync';
import { page, section } from '../report/html-page.js';
import { esc, num } from '../report/html-text.js';
import type { PackPlan } from './pack-plan.js';

export function packCsv(plan: PackPlan): string {
  const rows: Array<Array<string | number>> = [];
  for (const g of plan.groups) {
    g.cells.forEach((c, i) =>
      rows.push([
        g.index,
        i + 1,
        c.cell_id,
        c.capacity_Ah,
        c.resistance_ohm ?? '',
        Number(g.capacity_Ah.toFixed(6)),
        g.resistance_ohm === null ? '' : Number(g.resistance_ohm.toPrecision(6)),
      ]),
    );
  }
  return stringify(rows, {
    header: true,
    columns: [
      'group',
      'position',
      'cell_id',
      'capacity_Ah',
      'dc_resistance_ohm',
      'group_capacity_Ah',
      'group_resistance_ohm',
    ],
  });
}

/** Light to dark teal from the smallest to the largest capacity in the pack. */
function shade(x: number, lo: number, hi: number): string {
  const t = hi > lo ? (x - lo) / (hi - lo) : 0.5;
  const mix = (a: number, b: number): number => Math.round(a + (b - a) * t);
  return `rgb(${mix(204, 15)},${mix(240, 118)},${mix(234, 110)})`;
}

export function packPicture(plan: PackPlan): string {
  const W = 760;
  const top = 30;
  const colW = Math.min(60, (W - 20) / plan.series);
  const boxH = Math.max(2, Math.min(16, 480 / plan.parallel));
  const H = top + plan.parallel * boxH + 48;
  const caps = plan.groups.flatMap((g) => g.cells.map((c) => c.capacity_Ah));
  const lo = Math.min(...caps);
  const hi = Math.max(...caps);
  const out = [
    `<svg class="cv-plot" data-plot="pack" xmlns="http://www.w3.org/2000/svg" viewBox="0 0 ${W} ${H}" width="${W}" height="${H}" role="img" aria-label="The pack's groups">`,
    `<title>The pack: ${plan.series} groups in series, ${plan.parallel} cells in parallel each</title>`,
    `<rect x="0" y="0" width="${W}" height="${H}" fill="#fff"/>`,
    `<text x="10" y="18" class="cv-plot-title">${plan.series} groups in series (− at the left), ${plan.parallel} cells in parallel each; darker = more capacity</text>`,
  ];
  for (const [k, g] of plan.groups.entries()) {
    const x = 10 + k * colW;
    out.push(`<g data-group="${g.index}">`);
    g.cells.forEach((c, i) => {
      out.push(
        `<rect x="${(x + 2).toFixed(1)}" y="${(top + i * boxH).toFixed(1)}" width="${(colW - 4).toFixed(1)}" height="${Math.max(1, boxH - 1).toFixed(1)}" fill="${shade(c.capacity_Ah, lo, hi)}"><title>${esc(c.cell_id)}: ${num(c.capacity_Ah, 4)} Ah${c.resistance_ohm === null ? '' : `, ${num(c.resistance_ohm * 1000, 1)} mΩ`}</title></rect>`,
      );
    });
    const y = top + plan.parallel * boxH;
    out.push(
      `<text x="${(x + colW / 2).toFixed(1)}" y="${y + 16}" text-anchor="middle" class="cv-tick">${g.index}</text>`,
      `<text x="${(x + colW / 2).toFixed(1)}" y="${y + 32}" text-anchor="middle" class="cv-tick">${num(g.capacity_Ah, 2)}</text>`,
      '</g>',
    );
  }
  out.push(
    `<text x="${W - 10}" y="${H - 4}" text-anchor="end" class="cv-axis">group number, and its capacity in Ah</text>`,
    '</svg>',
  );
  return out.join('\n');
}

function planSummary(plan: PackPlan): string {
  const share = (x: number): string => `${num((x / plan.mean_group_Ah) * 100, 3)} %`;
  return `<ul>
<li>Expected pack capacity (its weakest group): <strong>${num(plan.pack_capacity_Ah, 3)} Ah</strong>; mean group ${num(plan.mean_group_Ah, 3)} Ah.</li>
<li>Spread of group capacities: ${num(plan.spread_Ah * 1000, 1)} mAh (${share(plan.spread_Ah)} of the mean); no grouping of these cells can do better than ${num(plan.lower_bound_Ah * 1000, 1)} mAh (${share(plan.lower_bound_Ah)}).</li>
<li>Group resistance spread: ${plan.resistance_spread_ohm === null ? '— (a cell has no resistance figure)' : `${num(plan.resistance_spread_ohm * 1000, 3)} mΩ`}; cells' resistance in series, without interconnects: ${plan.pack_resistance_ohm === null ? '—' : `${num(plan.pack_resistance_ohm * 1000, 1)} mΩ`}.</li>
<li>${plan.series * plan.parallel} cells chosen from ${plan.eligible} eligible (those of highest capacity); ${plan.left_out.length} left out.</li>
</ul>
<p class="small">Capacities are each cell's latest trustworthy run. Balance the cells' charge before joining them in parallel, and fuse each cell or group as the cell maker and your local codes require.</p>`;
}

function groupTable(plan: PackPlan): string {
  const rows = plan.groups.map(
    (g) =>
      `<tr><td>${g.index}</td><td>${num(g.capacity_Ah, 4)}</td><td>${g.resistance_ohm === null ? '—' : num(g.resistance_ohm * 1000, 3)}</td><td>${g.cells.map((c) => esc(c.cell_id)).join(', ')}</td></tr>`,
  );
  return `<table><thead><tr><th>group</th><th>capacity, Ah</th><th>resistance, mΩ</th><th>cells</th></tr></thead><tbody>${rows.join('\n')}</tbody></table>`;
}

export function packPage(plan: PackPlan, filterText: string, generatedAt: string): string {
  const body = [
    `<h1>Pack plan: ${plan.series}S${plan.parallel}P</h1>`,
    `<p class="sub">Cells eligible: ${esc(filterText)}</p>`,
    section('summary', 'Summary', planSummary(plan)),
    section('picture', 'The groups', packPicture(plan)),
    section('groups', 'Groups', groupTable(plan)),
  ].join('\n');
  return page(`Pack plan ${plan.series}S${plan.parallel}P`, body, generatedAt);
}
