import { escapeHtml } from './html-text.js';

/**
 * Small static charts as inline SVG for the printable report: no script, no external asset, so the
 * report prints the same anywhere. Lines, filled bands, vertical and horizontal markers with
 * labels, linear or log10 axes with ticks. Every label is escaped.
 * Cost: O(points) per chart; long series are thinned to at most MAX_POINTS by min/max per bucket
 * (keeps spikes visible).
 */
export interface SvgSeries {
  x: ArrayLike<number>;
  y: ArrayLike<number | null>;
  stroke: string;
  width?: number;
  dash?: string;
  /** Draw dots instead of a line. */
  dots?: boolean;
  label?: string;
}

export interface SvgBand {
  x: ArrayLike<number>;
  low: ArrayLike<number>;
  high: ArrayLike<number>;
  fill: string;
  opacity?: number;
}

export interface SvgChart {
  width: number;
  height: number;
  title: string;
  xLabel: string;
  yLabel: string;
  xLog?: boolean;
  yLog?: boolean;
  series: SvgSeries[];
  bands?: SvgBand[];
  /** Shaded x ranges (e.g. the warm-up). */
  spans?: { from: number; to: number; fill: string; label?: string }[];
  vlines?: { x: number; label: string; stroke: string }[];
  hlines?: { y: number; label?: string; stroke: string; dash?: string }[];
  /** Error bars: [x, low, high]. */
  errorBars?: { x: number; low: number; high: number; stroke: string }[];
  /** Include these y values in the range. */
  yInclude?: number[];
}

const MAX_POINTS = 1600;
const MARGIN = { left: 62, right: 12, top: 22, bottom: 34 };

export function svgChart(chart: SvgChart): string {
  const { width, height } = chart;
  const plotWidth = width - MARGIN.left - MARGIN.right;
  const plotHeight = height - MARGIN.top - MARGIN.bottom;
  const tx = chart.xLog ? safeLog : identity;
  const ty = chart.yLog ? safeLog : identity;
  const xs: number[] = [];
  const ys: number[] = [];
  for (const s of chart.series) {
    for (let i = 0; i < s.x.length; i++) {
      const y = s.y[i];
      if (y === null || y === undefined || !Number.isFinite(y) || (chart.yLog && !(y > 0))) continue;
      xs.push(tx(s.x[i] as number));
      ys.push(ty(y));
    }
  }
  for (const band of chart.bands ?? []) {
    for (let i = 0; i < band.x.length; i++) {
      xs.push(tx(band.x[i] as number));
      ys.push(ty(band.low[i] as number), ty(band.high[i] as number));
    }
  }
  for (const bar of chart.errorBars ?? []) ys.push(ty(bar.low), ty(bar.high));
  for (const y of chart.yInclude ?? []) ys.push(ty(y));
  for (const line of chart.hlines ?? []) ys.push(ty(line.y));
  const finiteXs = xs.filter(Number.isFinite);
  const finiteYs = ys.filter(Number.isFinite);
  if (finiteXs.length < 2 || finiteYs.length < 1) return '';
  let [x0, x1] = extent(finiteXs);
  let [y0, y1] = extent(finiteYs);
  if (x1 === x0) x1 = x0 + 1;
  if (y1 === y0) {
    const pad = Math.abs(y0) * 1e-3 || 1;
    y0 -= pad;
    y1 += pad;
  }
  const yPad = (y1 - y0) * 0.06;
  y0 -= yPad;
  y1 += yPad;
  const px = (v: number) => MARGIN.left + ((tx(v) - x0) / (x1 - x0)) * plotWidth;
  const py = (v: number) => MARGIN.top + plotHeight - ((ty(v) - y0) / (y1 - y0)) * plotHeight;
  const clipX = (v: number) => Math.min(MARGIN.left + plotWidth, Math.max(MARGIN.left, v));
  const parts: string[] = [];
  parts.push(`<rect x="${MARGIN.left}" y="${MARGIN.top}" width="${plotWidth}" height="${plotHeight}" fill="#fbfcfd" stroke="#b8c2ce"/>`);
  // Ticks and grid.
  for (const tick of ticks(x0, x1, chart.xLog ?? false)) {
    const x = MARGIN.left + ((tick.position - x0) / (x1 - x0)) * plotWidth;
    parts.push(`<line x1="${f(x)}" x2="${f(x)}" y1="${MARGIN.top}" y2="${MARGIN.top + plotHeight}" stroke="#e3e8ee"/>`);
    parts.push(`<text x="${f(x)}" y="${MARGIN.top + plotHeight + 13}" text-anchor="middle" font-size="9.5" fill="#4a5563">${escapeHtml(tick.label)}</text>`);
  }
  for (const tick of ticks(y0, y1, chart.yLog ?? false)) {
    const y = MARGIN.top + plotHeight - ((tick.position - y0) / (y1 - y0)) * plotHeight;
    parts.push(`<line x1="${MARGIN.left}" x2="${MARGIN.left + plotWidth}" y1="${f(y)}" y2="${f(y)}" stroke="#e3e8ee"/>`);
    parts.push(`<text x="${MARGIN.left - 4}" y="${f(y + 3)}" text-anchor="end" font-size="9.5" fill="#4a5563">${escapeHtml(tick.label)}</text>`);
  }
  for (const span of chart.spans ?? []) {
    const a = clipX(px(span.from));
    const b = clipX(px(span.to));
    if (b - a < 0.5) continue;
    parts.push(`<rect x="${f(a)}" y="${MARGIN.top}" width="${f(b - a)}" height="${plotHeight}" fill="${span.fill}" opacity="0.5"/>`);
    if (span.label) parts.push(`<text x="${f(a + 3)}" y="${MARGIN.top + 11}" font-size="9.5" fill="#6b4a12">${escapeHtml(span.label)}</text>`);
  }
  for (const band of chart.bands ?? []) {
    const upper: string[] = [];
    const lower: string[] = [];
    for (let i = 0; i < band.x.length; i++) {
      upper.push(`${f(px(band.x[i] as number))},${f(py(band.high[i] as number))}`);
      lower.push(`${f(px(band.x[i] as number))},${f(py(band.low[i] as number))}`);
    }
    parts.push(`<polygon points="${[...upper, ...lower.reverse()].join(' ')}" fill="${band.fill}" opacity="${band.opacity ?? 0.25}"/>`);
  }
  for (const line of chart.hlines ?? []) {
    const y = py(line.y);
    parts.push(`<line x1="${MARGIN.left}" x2="${MARGIN.left + plotWidth}" y1="${f(y)}" y2="${f(y)}" stroke="${line.stroke}" stroke-width="1.1"${line.dash ? ` stroke-dasharray="${line.dash}"` : ''}/>`);
    if (line.label) parts.push(`<text x="${MARGIN.left + plotWidth - 3}" y="${f(y - 3)}" text-anchor="end" font-size="9.5" fill="${line.stroke}">${escapeHtml(line.label)}</text>`);
  }
  for (const s of chart.series) {
    const points = thin(s, chart.yLog ?? false);
    if (points.length === 0) continue;
    if (s.dots) {
      for (const [x, y] of points) parts.push(`<circle cx="${f(px(x))}" cy="${f(py(y))}" r="2.3" fill="${s.stroke}"/>`);
      continue;
    }
    let d = '';
    let pen = false;
    for (const [x, y] of points) {
      if (!Number.isFinite(y)) {
        pen = false;
        continue;
      }
      d += `${pen ? 'L' : 'M'}${f(px(x))},${f(py(y))}`;
      pen = true;
    }
    parts.push(`<path d="${d}" fill="none" stroke="${s.stroke}" stroke-width="${s.width ?? 1}"${s.dash ? ` stroke-dasharray="${s.dash}"` : ''}/>`);
  }
  for (const bar of chart.errorBars ?? []) {
    const x = f(px(bar.x));
    parts.push(`<line x1="${x}" x2="${x}" y1="${f(py(bar.low))}" y2="${f(py(bar.high))}" stroke="${bar.stroke}" stroke-width="1"/>`);
  }
  for (const line of chart.vlines ?? []) {
    const x = px(line.x);
    if (x < MARGIN.left - 0.5 || x > MARGIN.left + plotWidth + 0.5) continue;
    parts.push(`<line x1="${f(x)}" x2="${f(x)}" y1="${MARGIN.top}" y2="${MARGIN.top + plotHeight}" stroke="${line.stroke}" stroke-width="1.3" stroke-dasharray="4 3"/>`);
    const anchor = x > MARGIN.left + plotWidth * 0.7 ? 'end' : 'start';
    parts.push(`<text x="${f(anchor === 'end' ? x - 3 : x + 3)}" y="${MARGIN.top + plotHeight - 5}" text-anchor="${anchor}" font-size="9.5" fill="${line.stroke}">${escapeHtml(line.label)}</text>`);
  }
  parts.push(`<text x="${MARGIN.left}" y="14" font-size="11" font-weight="600" fill="#1d2430">${escapeHtml(chart.title)}</text>`);
  parts.push(`<text x="${MARGIN.left + plotWidth / 2}" y="${height - 4}" text-anchor="middle" font-size="10" fill="#1d2430">${escapeHtml(chart.xLabel)}</text>`);
  parts.push(`<text transform="translate(12 ${MARGIN.top + plotHeight / 2}) rotate(-90)" text-anchor="middle" font-size="10" fill="#1d2430">${escapeHtml(chart.yLabel)}</text>`);
  const legend = chart.series.filter((s) => s.label);
  legend.forEach((s, i) => {
    const x = MARGIN.left + plotWidth - 150;
    const y = MARGIN.top + 12 + i * 12;
    parts.push(`<line x1="${x}" x2="${x + 14}" y1="${y - 3}" y2="${y - 3}" stroke="${s.stroke}" stroke-width="2"${s.dash ? ` stroke-dasharray="${s.dash}"` : ''}/><text x="${x + 18}" y="${y}" font-size="9.5" fill="#1d2430">${escapeHtml(s.label ?? '')}</text>`);
  });
  return `<svg xmlns="http://www.w3.org/2000/svg" width="${width}" height="${height}" viewBox="0 0 ${width} ${height}" role="img" aria-label="${escapeHtml(chart.title)}">${parts.join('')}</svg>`;
}

function identity(v: number): number {
  return v;
}

function safeLog(v: number): number {
  return v > 0 ? Math.log10(v) : Number.NaN;
}

function f(v: number): string {
  return Number.isFinite(v) ? v.toFixed(1) : '0';
}

function extent(values: number[]): [number, number] {
  let low = Number.POSITIVE_INFINITY;
  let high = Number.NEGATIVE_INFINITY;
  for (const v of values) {
    if (v < low) low = v;
    if (v > high) high = v;
  }
  return [low, high];
}

/** Min/max per bucket beyond MAX_POINTS, in x order. */
function thin(s: SvgSeries, yLog: boolean): [number, number][] {
  const points: [number, number][] = [];
  for (let i = 0; i < s.x.length; i++) {
    const y = s.y[i];
    if (y === null || y === undefined || !Number.isFinite(y) || (yLog && !(y > 0))) continue;
    points.push([s.x[i] as number, y]);
  }
  if (points.length <= MAX_POINTS || s.dots) return points;
  const buckets = MAX_POINTS / 2;
  const size = points.length / buckets;
  const out: [number, number][] = [];
  for (let b = 0; b < buckets; b++) {
    const from = Math.floor(b * size);
    const to = Math.min(points.length, Math.floor((b + 1) * size));
    let low = points[from] as [number, number];
    let high = low;
    for (let i = from; i < to; i++) {
      const p = points[i] as [number, number];
      if (p[1] < low[1]) low = p;
      if (p[1] > high[1]) high = p;
    }
    if (low[0] <= high[0]) out.push(low, high);
    else out.push(high, low);
  }
  return out;
}

/** Tick positions (in transformed units) with labels: decades on log axes, 1-2-5 steps on linear ones. */
function ticks(low: number, high: number, log: boolean): { position: number; label: string }[] {
  if (log) {
    const out: { position: number; label: string }[] = [];
    for (let e = Math.ceil(low); e <= Math.floor(high); e++) out.push({ position: e, label: decadeLabel(e) });
    if (out.length >= 2) return out;
    // Less than two decades shown: label the ends.
    return [
      { position: low, label: shortNumber(10 ** low) },
      { position: high, label: shortNumber(10 ** high) },
    ];
  }
  const span = high - low;
  const raw = span / 5;
  const magnitude = 10 ** Math.floor(Math.log10(raw));
  const step = [1, 2, 5, 10].map((m) => m * magnitude).find((s) => span / s <= 6) ?? 10 * magnitude;
  const out: { position: number; label: string }[] = [];
  for (let v = Math.ceil(low / step) * step; v <= high + step * 1e-9; v += step) out.push({ position: v, label: shortNumber(v, step) });
  return out;
}

function decadeLabel(exponent: number): string {
  if (exponent >= -3 && exponent <= 4) return String(10 ** exponent).replace(/^0\./, '0.');
  return `1e${exponent}`;
}

export function shortNumber(value: number, step?: number): string {
  if (value === 0) return '0';
  if (step !== undefined) {
    const decimals = Math.max(0, Math.min(10, -Math.floor(Math.log10(step) + 1e-9)));
    const large = Math.abs(value) >= 1e6;
    return large ? value.toExponential(2) : value.toFixed(decimals);
  }
  const abs = Math.abs(value);
  if (abs >= 1e5 || abs < 1e-3) return value.toExponential(1);
  return Number(value.toPrecision(3)).toString();
}

/** One bar of a horizontal bar chart: signed; negative bars go left of zero. */
export interface SvgBar {
  label: string;
  value: number;
  fill: string;
  /** Outline (e.g. to set covariance terms apart from variances). */
  stroke?: string;
  dash?: string;
  /** Text in the value column (default: the value, 3 significant digits). */
  valueLabel?: string;
  /** Shown on hover (an SVG title). */
  detail?: string;
}

export interface SvgBarChart {
  width: number;
  title: string;
  xLabel: string;
  bars: SvgBar[];
  /** Vertical reference lines (e.g. the total at 100 %). */
  vlines?: { x: number; label: string; stroke: string }[];
  legend?: { label: string; fill: string; stroke?: string; dash?: string }[];
}

const BAR_ROW = 20;
const VALUE_COLUMN = 64;
/** Approximate advance of a character at font-size 10 (labels are cut to fit their column). */
const CHARACTER_WIDTH = 5.6;

/**
 * A horizontal bar chart of signed values (e.g. an uncertainty budget in % of u_c^2, where
 * covariance terms can be negative): a label column, the bars from a zero line, a value column,
 * ticks below. Labels longer than their column are shortened in the middle, the full text kept in a
 * hover title. Cost O(bars).
 */
export function svgBarChart(chart: SvgBarChart): string {
  const bars = chart.bars.filter((b) => Number.isFinite(b.value));
  if (bars.length === 0) return '';
  const { width } = chart;
  const longest = Math.max(...bars.map((b) => b.label.length));
  const labelWidth = Math.round(Math.min(width * 0.42, Math.max(70, longest * CHARACTER_WIDTH + 14)));
  // The legend runs left to right below the title, on as many lines as it needs.
  const legendItems: { x: number; line: number; item: NonNullable<SvgBarChart['legend']>[number] }[] = [];
  let legendX = 4;
  let legendLine = 0;
  for (const item of chart.legend ?? []) {
    const itemWidth = 28 + item.label.length * 5.2;
    if (legendX > 4 && legendX + itemWidth > width) {
      legendLine++;
      legendX = 4;
    }
    legendItems.push({ x: legendX, line: legendLine, item });
    legendX += itemWidth;
  }
  const legendRows = legendItems.length > 0 ? legendLine + 1 : 0;
  const top = 22 + legendRows * 16 + (chart.vlines?.length ? 12 : 0);
  const left = labelWidth;
  const plotWidth = width - left - VALUE_COLUMN - 8;
  const plotHeight = bars.length * BAR_ROW;
  const height = top + plotHeight + 34;
  let low = Math.min(0, ...bars.map((b) => b.value), ...(chart.vlines ?? []).map((v) => v.x));
  let high = Math.max(0, ...bars.map((b) => b.value), ...(chart.vlines ?? []).map((v) => v.x));
  if (high === low) high = low + 1;
  const pad = (high - low) * 0.04;
  low -= low < 0 ? pad : 0;
  high += pad;
  const px = (v: number) => left + ((v - low) / (high - low)) * plotWidth;
  const parts: string[] = [];
  parts.push(`<rect x="${left}" y="${top}" width="${f(plotWidth)}" height="${plotHeight}" fill="#fbfcfd" stroke="#b8c2ce"/>`);
  for (const tick of ticks(low, high, false)) {
    const x = px(tick.position);
    parts.push(`<line x1="${f(x)}" x2="${f(x)}" y1="${top}" y2="${top + plotHeight}" stroke="#e3e8ee"/>`);
    parts.push(`<text x="${f(x)}" y="${top + plotHeight + 13}" text-anchor="middle" font-size="9.5" fill="#4a5563">${escapeHtml(tick.label)}</text>`);
  }
  const maxCharacters = Math.max(4, Math.floor((labelWidth - 8) / CHARACTER_WIDTH));
  bars.forEach((bar, i) => {
    const y = top + i * BAR_ROW;
    const a = px(Math.min(0, bar.value));
    const b = px(Math.max(0, bar.value));
    const title = `<title>${escapeHtml(bar.detail ?? `${bar.label}: ${bar.valueLabel ?? shortNumber(bar.value)}`)}</title>`;
    parts.push(`<g>${title}<text x="${left - 6}" y="${y + 13.5}" text-anchor="end" font-size="10" fill="#1d2430">${escapeHtml(shorten(bar.label, maxCharacters))}</text>`);
    parts.push(`<rect x="${f(a)}" y="${y + 4}" width="${f(Math.max(0.8, b - a))}" height="${BAR_ROW - 8}" fill="${bar.fill}"${bar.stroke ? ` stroke="${bar.stroke}" stroke-width="1.2"` : ''}${bar.dash ? ` stroke-dasharray="${bar.dash}"` : ''}/>`);
    parts.push(`<text x="${width - 4}" y="${y + 13.5}" text-anchor="end" font-size="10" fill="#1d2430">${escapeHtml(bar.valueLabel ?? shortNumber(bar.value))}</text></g>`);
  });
  parts.push(`<line x1="${f(px(0))}" x2="${f(px(0))}" y1="${top}" y2="${top + plotHeight}" stroke="#1d2430" stroke-width="1"/>`);
  for (const line of chart.vlines ?? []) {
    const x = px(line.x);
    parts.push(`<line x1="${f(x)}" x2="${f(x)}" y1="${top}" y2="${top + plotHeight}" stroke="${line.stroke}" stroke-width="1.2" stroke-dasharray="4 3"/>`);
    parts.push(`<text x="${f(x)}" y="${top - 3}" text-anchor="middle" font-size="9.5" fill="${line.stroke}">${escapeHtml(line.label)}</text>`);
  }
  parts.push(`<text x="4" y="14" font-size="11" font-weight="600" fill="#1d2430">${escapeHtml(chart.title)}</text>`);
  for (const { x, line, item } of legendItems) {
    const y = 22 + line * 16;
    parts.push(`<rect x="${f(x)}" y="${y}" width="12" height="9" fill="${item.fill}"${item.stroke ? ` stroke="${item.stroke}"` : ''}${item.dash ? ` stroke-dasharray="${item.dash}"` : ''}/><text x="${f(x + 16)}" y="${y + 8}" font-size="9.5" fill="#1d2430">${escapeHtml(item.label)}</text>`);
  }
  parts.push(`<text x="${f(left + plotWidth / 2)}" y="${height - 2}" text-anchor="middle" font-size="10" fill="#1d2430">${escapeHtml(chart.xLabel)}</text>`);
  return `<svg xmlns="http://www.w3.org/2000/svg" width="${width}" height="${height}" viewBox="0 0 ${width} ${height}" role="img" aria-label="${escapeHtml(chart.title)}">${parts.join('')}</svg>`;
}

/** A label cut in the middle to at most `max` characters. */
function shorten(label: string, max: number): string {
  if (label.length <= max) return label;
  const head = Math.ceil((max - 1) / 2);
  return `${label.slice(0, head)}…${label.slice(label.length - (max - 1 - head))}`;
}
