/**
 * Line plots as inline SVG text: axes with rounded ticks, lines, an optional min–max band per
 * line, horizontal reference lines and a legend. No scripts, no fonts to fetch.
 */
import { esc } from './html-text.js';

export interface PlotSeries {
  name: string;
  color: string;
  points: ReadonlyArray<readonly [number, number]>;
  /** Shaded band: x, low, high. */
  band?: ReadonlyArray<readonly [number, number, number]>;
  /** Vertical error bars: x, low, high. */
  errorBars?: ReadonlyArray<readonly [number, number, number]>;
  /** A dot at every point (for sparse series, such as one figure per run). */
  markers?: boolean;
  /** Join the points by a line. @default true */
  line?: boolean;
}

export interface PlotAxis {
  label: string;
  min?: number;
  max?: number;
  /** Smallest span shown, so that the noise of a steady reading is not blown up to full height. */
  minSpan?: number;
}

export interface PlotSpec {
  /** Machine name, written as data-plot. */
  id: string;
  title: string;
  x: PlotAxis;
  y: PlotAxis;
  series: PlotSeries[];
  /** Horizontal lines (a cutoff, for instance). */
  rules?: Array<{ y: number; label: string; color: string }>;
  width?: number;
  height?: number;
}

/** Round tick values covering [min, max]: steps of 1, 2 or 5 times a power of ten. */
export function niceTicks(min: number, max: number, target = 6): number[] {
  if (!(max > min)) return [min];
  const raw = (max - min) / Math.max(1, target - 1);
  const mag = 10 ** Math.floor(Math.log10(raw));
  const step = ([1, 2, 5, 10].find((m) => m * mag >= raw) ?? 10) * mag;
  const out: number[] = [];
  for (let v = Math.ceil(min / step - 1e-9) * step; v <= max + step * 1e-9; v += step)
    out.push(Number(v.toPrecision(12)));
  return out;
}

function extent(
  values: number[],
  fixedMin?: number,
  fixedMax?: number,
  minSpan = 0,
): [number, number] {
  const finite = values.filter(Number.isFinite);
  if (finite.length > 0 && fixedMin === undefined && fixedMax === undefined) {
    const lo = Math.min(...finite);
    const hi = Math.max(...finite);
    if (hi - lo < minSpan) return [(lo + hi) / 2 - minSpan / 2, (lo + hi) / 2 + minSpan / 2];
  }
  let lo = fixedMin ?? (finite.length ? Math.min(...finite) : 0);
  let hi = fixedMax ?? (finite.length ? Math.max(...finite) : 1);
  if (hi === lo) {
    const pad = Math.abs(hi) * 0.05 || 1;
    lo -= fixedMin === undefined ? pad : 0;
    hi += fixedMax === undefined ? pad : 0;
  } else if (fixedMin === undefined || fixedMax === undefined) {
    const pad = (hi - lo) * 0.04;
    if (fixedMin === undefined) lo -= pad;
    if (fixedMax === undefined) hi += pad;
  }
  return [lo, hi];
}

function label(v: number, step: number): string {
  const digits = Math.max(0, Math.min(6, -Math.floor(Math.log10(step) + 1e-9)));
  return v.toFixed(digits);
}

/** Legend names longer than this are cut; an 11 px sans-serif character is about 6.4 px wide. */
const LEGEND_CHARS = 26;
const LEGEND_CHAR_PX = 6.4;

/** The plot area inside its margins, and the mapping of data values onto it. */
interface Frame {
  W: number;
  H: number;
  m: { l: number; r: number; t: number; b: number };
  x0: number;
  x1: number;
  y0: number;
  y1: number;
  px(x: number): number;
  py(y: number): number;
}

const f = (v: number): string => v.toFixed(1);

function frameOf(p: PlotSpec): Frame {
  const W = p.width ?? 1000;
  const H = p.height ?? 300;
  const m = { l: 64, r: 16, t: 34, b: 46 };
  const xs = p.series.flatMap((s) => s.points.map((q) => q[0]));
  const ys = p.series
    .flatMap((s) => [
      ...s.points.map((q) => q[1]),
      ...(s.band ?? []).flatMap((b) => [b[1], b[2]]),
      ...(s.errorBars ?? []).flatMap((b) => [b[1], b[2]]),
    ])
    .concat((p.rules ?? []).map((r) => r.y));
  const [x0, x1] = extent(xs, p.x.min, p.x.max, p.x.minSpan);
  const [y0, y1] = extent(ys, p.y.min, p.y.max, p.y.minSpan);
  return {
    W,
    H,
    m,
    x0,
    x1,
    y0,
    y1,
    px: (x) => m.l + ((x - x0) / (x1 - x0)) * (W - m.l - m.r),
    py: (y) => H - m.b - ((y - y0) / (y1 - y0)) * (H - m.t - m.b),
  };
}

/** Grid lines and tick labels on both axes, the frame and the axis labels. */
function axes(p: PlotSpec, g: Frame): string[] {
  const { W, H, m, x0, x1, y0, y1, px, py } = g;
  const out: string[] = [];
  const xt = niceTicks(x0, x1);
  const yt = niceTicks(y0, y1, 5);
  const xStep = (xt[1] ?? x1) - (xt[0] ?? x0) || 1;
  const yStep = (yt[1] ?? y1) - (yt[0] ?? y0) || 1;
  for (const v of yt) {
    if (v < y0 || v > y1) continue;
    out.push(
      `<line x1="${m.l}" x2="${W - m.r}" y1="${f(py(v))}" y2="${f(py(v))}" class="cv-grid"/>`,
      `<text x="${m.l - 6}" y="${f(py(v) + 4)}" text-anchor="end" class="cv-tick">${label(v, yStep)}</text>`,
    );
  }
  for (const v of xt) {
    if (v < x0 || v > x1) continue;
    out.push(
      `<line x1="${f(px(v))}" x2="${f(px(v))}" y1="${m.t}" y2="${H - m.b}" class="cv-grid"/>`,
      `<text x="${f(px(v))}" y="${H - m.b + 16}" text-anchor="middle" class="cv-tick">${label(v, xStep)}</text>`,
    );
  }
  out.push(
    `<rect x="${m.l}" y="${m.t}" width="${W - m.l - m.r}" height="${H - m.t - m.b}" class="cv-frame"/>`,
    `<text x="${(m.l + W - m.r) / 2}" y="${H - 8}" text-anchor="middle" class="cv-axis">${esc(p.x.label)}</text>`,
    `<text transform="translate(16 ${(m.t + H - m.b) / 2}) rotate(-90)" text-anchor="middle" class="cv-axis">${esc(p.y.label)}</text>`,
  );
  return out;
}

/** Horizontal reference lines, dashed, each with its label at the right. */
function rules(p: PlotSpec, g: Frame): string[] {
  const { W, m, py } = g;
  return (p.rules ?? []).flatMap((r) => [
    `<line x1="${m.l}" x2="${W - m.r}" y1="${f(py(r.y))}" y2="${f(py(r.y))}" stroke="${r.color}" stroke-dasharray="6 4" stroke-width="1"/>`,
    `<text x="${W - m.r - 4}" y="${f(py(r.y) - 4)}" text-anchor="end" class="cv-rule" fill="${r.color}">${esc(r.label)}</text>`,
  ]);
}

/** One series: its band, its line, its error bars and its markers. */
function seriesShapes(s: PlotSeries, g: Frame): string[] {
  const { px, py } = g;
  const out: string[] = [];
  if (s.band && s.band.length > 1) {
    const upper = s.band.map((b) => `${f(px(b[0]))},${f(py(b[2]))}`);
    const lower = [...s.band].reverse().map((b) => `${f(px(b[0]))},${f(py(b[1]))}`);
    out.push(
      `<polygon points="${[...upper, ...lower].join(' ')}" fill="${s.color}" fill-opacity="0.16" stroke="none"/>`,
    );
  }
  if (s.points.length > 0 && s.line !== false) {
    out.push(
      `<polyline data-series="${esc(s.name)}" data-points="${s.points.length}" points="${s.points.map((q) => `${f(px(q[0]))},${f(py(q[1]))}`).join(' ')}" fill="none" stroke="${s.color}" stroke-width="1.6" stroke-linejoin="round"/>`,
    );
  }
  for (const [x, lo, hi] of s.errorBars ?? []) {
    const X = f(px(x));
    out.push(
      `<path class="cv-error-bar" d="M${X},${f(py(lo))}V${f(py(hi))}M${f(px(x) - 4)},${f(py(lo))}h8M${f(px(x) - 4)},${f(py(hi))}h8" stroke="${s.color}" stroke-width="1.2" fill="none"/>`,
    );
  }
  if (s.markers)
    for (const [x, y] of s.points)
      out.push(`<circle cx="${f(px(x))}" cy="${f(py(y))}" r="3" fill="${s.color}"/>`);
  return out;
}

/** Names are cut to what the spacing allows, and the legend wraps before the frame's edge. */
function legend(series: readonly PlotSeries[], g: Frame): string[] {
  const { W, m } = g;
  const out: string[] = [];
  let lx = m.l + 8;
  let ly = m.t + 8;
  for (const s of series) {
    const shown = s.name.length > LEGEND_CHARS ? `${s.name.slice(0, LEGEND_CHARS - 1)}…` : s.name;
    const width = 28 + shown.length * LEGEND_CHAR_PX;
    if (lx > m.l + 8 && lx + width > W - m.r) {
      lx = m.l + 8;
      ly += 15;
    }
    out.push(
      `<rect x="${lx}" y="${ly}" width="14" height="3" fill="${s.color}"/>`,
      `<text x="${lx + 18}" y="${ly + 5}" class="cv-legend" data-legend="${esc(s.name)}"><title>${esc(s.name)}</title>${esc(shown)}</text>`,
    );
    lx += width;
  }
  return out;
}

export function linePlot(p: PlotSpec): string {
  const g = frameOf(p);
  const { W, H } = g;
  const empty = p.series.every((s) => s.points.length === 0);
  return [
    `<svg class="cv-plot" data-plot="${esc(p.id)}" xmlns="http://www.w3.org/2000/svg" viewBox="0 0 ${W} ${H}" width="${W}" height="${H}" role="img" aria-label="${esc(p.title)}">`,
    `<title>${esc(p.title)}</title>`,
    `<rect x="0" y="0" width="${W}" height="${H}" fill="#fff"/>`,
    `<text x="${g.m.l}" y="20" class="cv-plot-title">${esc(p.title)}</text>`,
    ...axes(p, g),
    ...rules(p, g),
    `<g class="cv-lines">`,
    ...p.series.flatMap((s) => seriesShapes(s, g)),
    '</g>',
    ...(empty
      ? [`<text x="${W / 2}" y="${H / 2}" text-anchor="middle" class="cv-axis">no data</text>`]
      : []),
    ...(p.series.length > 1 ? legend(p.series, g) : []),
    '</svg>',
  ].join('\n');
}
