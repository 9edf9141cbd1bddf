/** The page around a report: one self-contained HTML file with its style inline. */
import { packageVersion } from '../core/paths.js';
import { esc } from './html-text.js';

const STYLE = `
:root { --ink: #1d2430; --muted: #5b6675; --line: #d6dbe2; --band: #f3f5f8; --warn: #9a3412; --good: #166534; --bad: #991b1b; }
* { box-sizing: border-box; }
body { font: 15px/1.45 system-ui, -apple-system, "Segoe UI", Roboto, sans-serif; color: var(--ink); margin: 0; background: #fafbfc; }
main { max-width: 1100px; margin: 0 auto; padding: 24px 20px 48px; }
h1 { font-size: 24px; margin: 0 0 4px; }
h2 { font-size: 18px; margin: 32px 0 8px; padding-bottom: 4px; border-bottom: 2px solid var(--line); }
h3 { font-size: 15px; margin: 18px 0 6px; }
p.sub, p.small, td.small, footer { color: var(--muted); font-size: 13px; }
table { border-collapse: collapse; width: 100%; margin: 6px 0 10px; background: #fff; }
th, td { text-align: left; padding: 5px 8px; border-bottom: 1px solid var(--line); vertical-align: top; }
thead th { background: var(--band); font-weight: 600; font-size: 13px; }
td[data-value], td.num { font-variant-numeric: tabular-nums; }
tr.total td, tr.total th { font-weight: 600; border-top: 2px solid var(--line); }
tr.ev-alarm td { color: var(--bad); font-weight: 600; }
tr.ev-alarm td:first-child { box-shadow: inset 4px 0 0 var(--bad); }
tr.ev-warning td:first-child { box-shadow: inset 4px 0 0 #d97706; }
tr.ev-note td { color: var(--muted); }
tr.safety-end th, tr.safety-end td { background: #fdecec; color: var(--bad); font-weight: 600; }
.box.safety-end { border-left-color: var(--bad); background: #fdf3f3; }
.scroll { overflow-x: auto; max-width: 100%; }
td, th { overflow-wrap: anywhere; }
.box { border: 1px solid var(--line); border-left: 5px solid var(--muted); background: #fff; padding: 10px 14px; margin: 10px 0; }
.box.meets { border-left-color: var(--good); }
.box.does_not_meet { border-left-color: var(--bad); }
.box.method_not_followed, .box.incomplete { border-left-color: var(--warn); }
.box .label { font-size: 12px; text-transform: uppercase; letter-spacing: 0.04em; color: var(--muted); }
ul { margin: 4px 0 8px 20px; padding: 0; }
svg.cv-plot { display: block; width: 100%; max-width: 100%; height: auto; margin: 8px 0 14px; border: 1px solid var(--line); }
.cv-plot-title { font: 600 13px system-ui, sans-serif; fill: var(--ink); }
.cv-tick, .cv-legend, .cv-rule { font: 11px system-ui, sans-serif; fill: var(--muted); }
.cv-axis { font: 12px system-ui, sans-serif; fill: var(--ink); }
.cv-grid { stroke: #e6e9ee; stroke-width: 1; }
.cv-frame { fill: none; stroke: #aab2bd; stroke-width: 1; }
@media (max-width: 640px) { main { padding: 16px 10px 32px; } th, td { padding: 4px 5px; font-size: 13px; } h1 { font-size: 20px; } }
@media print { body { background: #fff; } h2 { break-after: avoid; } svg.cv-plot, table { break-inside: avoid; } }
`;

export function page(title: string, body: string, generatedAt: string): string {
  return `<!doctype html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta name="generator" content="cellvigil ${esc(packageVersion())}">
<title>${esc(title)}</title>
<style>${STYLE}</style>
</head>
<body>
<main>
${body}
<footer><p>Written by cellvigil ${esc(packageVersion())} on ${esc(generatedAt)} from the raw ADC counts in the run folder. Nothing in this page is fetched from the network.</p></footer>
</main>
</body>
</html>
`;
}

/** A section with an id and a heading. */
export function section(id: string, heading: string, content: string): string {
  return `<section id="${esc(id)}">\n<h2>${esc(heading)}</h2>\n${content}\n</section>`;
}

/** Series colours for several runs: distinct in hue and lightness. */
export const RUN_COLOURS = [
  '#0f766e',
  '#b45309',
  '#4338ca',
  '#be123c',
  '#4d7c0f',
  '#7e22ce',
  '#0369a1',
  '#a16207',
];
export const VOLTAGE_COLOUR = '#0f766e';
export const CURRENT_COLOUR = '#b45309';
export const TEMPERATURE_COLOUR = '#be123c';
export const RULE_COLOUR = '#991b1b';
