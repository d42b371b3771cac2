import { unitText } from './format.js';

// Charts of the channel view, drawn with uPlot (served by the daemon from its own installation)
// in the sheet's own style: colours from the page's CSS variables (light and dark sheet), hairline
// axes in the ink colour, times of day as 24-hour HH:MM:SS on one line, a key drawn as a row of
// short strokes (style.css, .chart-key), and a readout that follows the cursor with the values
// under it. Each builder returns { update(detail), destroy() } and redraws in place; markers
// (warm-up cut, summation window, averaging limit) are drawn by a small plugin on the canvas.

/** The palette, read from the CSS variables of the current sheet (refreshed before each chart is built). */
const COLORS = {};

function refreshPalette() {
  const style = getComputedStyle(document.documentElement);
  const v = (name, fallback) => style.getPropertyValue(name).trim() || fallback;
  Object.assign(COLORS, {
    axis: v('--ink-soft', '#4a5560'),
    grid: v('--chart-grid', 'rgba(40,60,80,0.12)'),
    trace: v('--chart-trace', '#3b4650'),
    mean: v('--chart-mean', '#0d5c63'),
    band: v('--chart-band', 'rgba(13,92,99,0.16)'),
    bandLine: v('--chart-band-line', 'rgba(13,92,99,0.55)'),
    excluded: v('--chart-excluded', 'rgba(154,106,0,0.12)'),
    cut: v('--warming', '#9a6a00'),
    acf: v('--chart-mean', '#0d5c63'),
    acfFill: v('--chart-band', 'rgba(13,92,99,0.16)'),
    noise: v('--ink-faint', '#8a949c'),
    allan: v('--chart-mean', '#0d5c63'),
    limit: v('--unsteady', '#b3261e'),
    reference: v('--ink-faint', '#8a949c'),
    upper: v('--chart-mean', '#0d5c63'),
    lower: v('--warming', '#9a6a00'),
    decision: v('--unsteady', '#b3261e'),
    gap: v('--chart-gap', 'rgba(179,38,30,0.10)'),
    gapLine: v('--unsteady', '#b3261e'),
  });
}

const FONT = '12px "DejaVu Sans", "Segoe UI", system-ui, sans-serif';

function axis(label, extra = {}) {
  return { label, stroke: COLORS.axis, grid: { stroke: COLORS.grid, width: 1 }, ticks: { stroke: COLORS.axis, width: 1, size: 5 }, border: { show: true, stroke: COLORS.axis, width: 1 }, font: FONT, labelFont: FONT, ...extra };
}

const pad2 = (n) => String(n).padStart(2, '0');

/** Time-of-day ticks, 24-hour, on one line (seconds when the span is short). */
function clockTicks(_u, splits, _axisIdx, _space, increment) {
  return splits.map((v) => {
    const d = new Date(v * 1000);
    const hm = `${pad2(d.getHours())}:${pad2(d.getMinutes())}`;
    return increment < 60 ? `${hm}:${pad2(d.getSeconds())}` : hm;
  });
}

/** The time axis: 24-hour local time of day, labelled as such. */
function timeAxis(label) {
  return axis(label, { values: clockTicks, space: 70 });
}

/**
 * The readout: a small box that follows the cursor with the x value and each shown series' value
 * (our replacement for a hover legend). `formatX` turns the x value into text.
 */
function readoutPlugin(formatX, unitOf = () => '') {
  let box = null;
  return {
    hooks: {
      init: (u) => {
        box = document.createElement('div');
        box.className = 'chart-readout';
        box.hidden = true;
        u.over.appendChild(box);
      },
      setCursor: (u) => {
        const i = u.cursor.idx;
        if (i === null || i === undefined || u.cursor.left < 0) {
          box.hidden = true;
          return;
        }
        const lines = [formatX(u.data[0][i])];
        u.series.forEach((series, k) => {
          if (k === 0 || !series.show) return;
          const value = u.data[k][i];
          if (value === null || value === undefined || !Number.isFinite(value)) return;
          const unit = unitOf(series);
          lines.push(`${series.label}: ${Number(value.toPrecision(6))}${unit ? ` ${unit}` : ''}`);
        });
        box.replaceChildren(...lines.map((text, k) => {
          const line = document.createElement('div');
          line.textContent = text;
          if (k === 0) line.className = 'chart-readout-x';
          return line;
        }));
        box.hidden = false;
        const right = u.cursor.left > u.over.clientWidth * 0.6;
        box.style.left = right ? '' : `${u.cursor.left + 12}px`;
        box.style.right = right ? `${u.over.clientWidth - u.cursor.left + 12}px` : '';
        box.style.top = `${Math.max(0, u.cursor.top - 10)}px`;
      },
    },
  };
}

const timeText = (v) => {
  const d = new Date(v * 1000);
  return `${pad2(d.getHours())}:${pad2(d.getMinutes())}:${pad2(d.getSeconds())}`;
};
const plainX = (name) => (v) => `${name} ${Number(Number(v).toPrecision(6))}`;

/** Vertical markers and shaded spans, drawn after (lines) or before (spans) the series. */
function markerPlugin(getMarkers) {
  const drawSpans = (u) => {
    const { spans } = getMarkers();
    const ctx = u.ctx;
    const { top, height, left, width } = u.bbox;
    ctx.save();
    const ratio = window.devicePixelRatio || 1;
    let marked = 0;
    for (const span of spans ?? []) {
      let a = Math.max(left, u.valToPos(span.from, 'x', true));
      let b = Math.min(left + width, u.valToPos(span.to, 'x', true));
      if (!(b > a)) continue;
      if (span.hatch) marked++;
      // A marked interval (a gap) stays visible however narrow: at least 3 px wide.
      if (span.hatch && b - a < 3 * ratio) {
        const mid = (a + b) / 2;
        a = Math.max(left, mid - 1.5 * ratio);
        b = Math.min(left + width, mid + 1.5 * ratio);
      }
      ctx.fillStyle = span.fill;
      ctx.fillRect(a, top, b - a, height);
      if (!span.hatch) continue;
      // Hatching and edges: the interval reads without colour.
      ctx.save();
      ctx.beginPath();
      ctx.rect(a, top, b - a, height);
      ctx.clip();
      ctx.strokeStyle = span.line;
      ctx.globalAlpha = 0.5;
      ctx.lineWidth = 1 * ratio;
      const step = 7 * ratio;
      ctx.beginPath();
      for (let x = a - height; x < b; x += step) {
        ctx.moveTo(x, top + height);
        ctx.lineTo(x + height, top);
      }
      ctx.stroke();
      ctx.restore();
      ctx.strokeStyle = span.line;
      ctx.lineWidth = 1 * ratio;
      ctx.strokeRect(a, top, b - a, height);
    }
    ctx.restore();
    // How many marked intervals are drawn in the visible range (read by the tests and assistive text).
    u.root.dataset.markedIntervals = String(marked);
  };
  const drawLines = (u) => {
    const { lines } = getMarkers();
    const ctx = u.ctx;
    const { top, height, left, width } = u.bbox;
    const ratio = window.devicePixelRatio || 1;
    ctx.save();
    ctx.font = `${Math.round(11 * ratio)}px "DejaVu Sans", system-ui, sans-serif`;
    // Labels of lines close together go one below the other instead of over each other.
    const placed = [];
    for (const line of lines ?? []) {
      const x = u.valToPos(line.x, 'x', true);
      if (!(x >= left - 1 && x <= left + width + 1)) continue;
      ctx.strokeStyle = line.color;
      ctx.lineWidth = 1.5 * ratio;
      ctx.setLineDash([5 * ratio, 4 * ratio]);
      ctx.beginPath();
      ctx.moveTo(x, top);
      ctx.lineTo(x, top + height);
      ctx.stroke();
      ctx.setLineDash([]);
      ctx.fillStyle = line.color;
      const right = x > left + width * 0.7;
      ctx.textAlign = right ? 'right' : 'left';
      const labelWidth = ctx.measureText(line.label).width;
      const from = right ? x - 4 * ratio - labelWidth : x + 4 * ratio;
      let row = 0;
      while (placed.some((p) => p.row === row && from < p.to + 6 * ratio && from + labelWidth > p.from - 6 * ratio)) row++;
      placed.push({ row, from, to: from + labelWidth });
      ctx.fillText(line.label, right ? x - 4 * ratio : x + 4 * ratio, top + (13 + 14 * row) * ratio);
    }
    ctx.restore();
  };
  return { hooks: { drawAxes: [drawSpans], draw: [drawLines] } };
}

/** Value ticks with as many decimals as the step between them needs (uPlot's own can repeat one label on a narrow range). */
function valueTicks(_u, splits, _axisIdx, _space, increment) {
  const decimals = increment > 0 && Number.isFinite(increment) ? Math.max(0, Math.min(12, -Math.floor(Math.log10(increment) + 1e-9))) : 3;
  return splits.map((v) => (v === null || v === undefined ? '' : Math.abs(v) >= 1e9 ? v.toExponential(3) : v.toFixed(decimals)));
}

/** Tick labels for log axes: plain numbers in the middle decades, powers of ten beyond. */
function logTicks(_u, splits) {
  return splits.map((v) => {
    if (v === null || v === undefined || !(v > 0)) return '';
    const exponent = Math.round(Math.log10(v));
    if (Math.abs(v - 10 ** exponent) > 1e-9 * v) return '';
    return exponent >= -3 && exponent <= 4 ? String(Number(v.toPrecision(1))) : `1e${exponent}`;
  });
}

function sized(container, height) {
  return { width: Math.max(240, container.clientWidth - 4), height };
}

function makeChart(container, options, data, height) {
  const plot = new uPlot({ ...sized(container, height), ...options, legend: { show: true, live: false }, class: 'sheet-chart' }, data, container);
  const observer = new ResizeObserver(() => plot.setSize(sized(container, height)));
  observer.observe(container);
  return {
    plot,
    destroy() {
      observer.disconnect();
      plot.destroy();
    },
  };
}

/**
 * The trace: samples, the mean over the averaging window with its +/-U band, the samples outside
 * the window shaded (the warm-up, or before the test point), the cut marked, and gaps hatched.
 *
 * A time range: `setRange(range)` with null (every sample loaded), { kind: 'last', seconds },
 * { kind: 'origin' } (since the test point's start), { kind: 'window' } (the averaging window) or
 * { kind: 'zoom', min, max } (x values); a relative range follows the newest sample at each update.
 * Dragging across the chart zooms to the dragged span and reports it through `onZoom(min, max)`.
 * `shown()` tells the x span on screen and whether x is time.
 */
export function traceChart(container, timeLabel = 'time of day (24 h, local)', onZoom = () => {}) {
  let unit = null;
  let markers = { spans: [], lines: [] };
  let chart = null;
  let timed = true;
  let range = null;
  let lastX = [];
  let origin = null;
  let windowStart = null;
  let rate = null;
  let applying = false;
  let dragged = false;
  const resolve = () => {
    if (!range || lastX.length === 0) return null;
    const first = lastX[0];
    const last = lastX[lastX.length - 1];
    if (range.kind === 'zoom') return { min: range.min, max: range.max };
    if (range.kind === 'last') {
      const span = timed ? range.seconds : rate > 0 ? range.seconds * rate : range.seconds;
      return { min: Math.max(first, last - span), max: last };
    }
    if (range.kind === 'origin') return { min: origin ?? first, max: last };
    if (range.kind === 'window') return { min: windowStart ?? first, max: last };
    return null;
  };
  const apply = () => {
    const span = resolve();
    if (!chart || !span || !(span.max > span.min)) return;
    applying = true;
    chart.plot.setScale('x', span);
    applying = false;
  };
  const build = (data) => {
    chart?.destroy();
    refreshPalette();
    chart = makeChart(
      container,
      {
        cursor: { drag: { x: true, y: false, setScale: true } },
        scales: { x: { time: timed } },
        axes: [timed ? timeAxis(timeLabel) : axis('sample'), axis(unit || 'value', { size: 80, values: valueTicks })],
        series: [
          {},
          { label: 'samples', stroke: COLORS.trace, width: 1, points: { show: false } },
          { label: 'mean', stroke: COLORS.mean, width: 2, points: { show: false } },
          { label: '+U', stroke: COLORS.bandLine, width: 1, dash: [4, 4], points: { show: false } },
          { label: '−U', stroke: COLORS.bandLine, width: 1, dash: [4, 4], points: { show: false } },
        ],
        bands: [{ series: [3, 4], fill: COLORS.band }],
        hooks: {
          // A drag across the chart: the dragged span becomes the range (kept over the reloads).
          // (uPlot settles a scale after the selection is cleared: the selection is noted when it is made.)
          setSelect: [
            (u) => {
              if (u.select.width > 0) dragged = true;
            },
          ],
          setScale: [
            (u, key) => {
              if (key !== 'x' || applying || !dragged) return;
              dragged = false;
              const { min, max } = u.scales.x;
              if (Number.isFinite(min) && Number.isFinite(max) && max > min) {
                range = { kind: 'zoom', min, max };
                onZoom(min, max);
              }
            },
          ],
        },
        plugins: [markerPlugin(() => markers), readoutPlugin(timed ? timeText : plainX('sample'), () => unit ?? '')],
      },
      data,
      300,
    );
  };
  return {
    update(detail) {
      const trace = detail.trace;
      const n = trace.values.length;
      // (Compared as printed: the chart is built again only when the unit really changes.)
      const unitChanged = (unitText(detail.unit) || null) !== unit;
      unit = unitText(detail.unit) || null;
      rate = detail.rate ?? null;
      // Time on the x axis when every sample has one and they never go back (late samples can).
      const isTimed = n > 0 && trace.times.every((t, i) => t !== null && (i === 0 || t >= trace.times[i - 1]));
      const x = isTimed ? trace.times.slice() : trace.values.map((_, i) => trace.firstIndex + i);
      const start = Math.max(0, trace.windowStartIndex - trace.firstIndex);
      const inWindow = (i) => i >= start;
      const mean = detail.mean;
      const U = detail.expandedUncertainty;
      const meanSeries = trace.values.map((_, i) => (mean !== null && inWindow(i) ? mean : null));
      const upper = trace.values.map((_, i) => (mean !== null && U !== null && inWindow(i) ? mean + U : null));
      const lower = trace.values.map((_, i) => (mean !== null && U !== null && inWindow(i) ? mean - U : null));
      const spans = [];
      const lines = [];
      const originOffset = trace.originIndex - trace.firstIndex;
      origin = originOffset >= 0 && originOffset < n ? x[originOffset] : null;
      windowStart = start < n ? x[start] : null;
      if (start > 0 && start < n) {
        spans.push({ from: x[0], to: x[start], fill: COLORS.excluded });
        if (originOffset > 0 && originOffset < start) lines.push({ x: x[originOffset], label: 'test point start', color: COLORS.axis });
        lines.push({ x: x[start], label: detail.excluded > 0 ? 'warm-up cut' : 'window start', color: COLORS.cut });
      }
      // Samples that never came: hatched intervals between the last sample before and the first after.
      if (isTimed) for (const gap of trace.gaps ?? []) spans.push({ from: gap.from, to: gap.to, fill: COLORS.gap, line: COLORS.gapLine, hatch: true });
      markers = { spans, lines };
      lastX = x;
      const data = [x, trace.values, meanSeries, upper, lower];
      if (!chart || isTimed !== timed || unitChanged) {
        if (isTimed !== timed && range?.kind === 'zoom') range = null;
        timed = isTimed;
        build(data);
      } else {
        applying = true;
        chart.plot.setData(data, range === null);
        applying = false;
      }
      apply();
    },
    /** null: every sample loaded; otherwise a range (see above). */
    setRange(next) {
      range = next;
      if (!chart) return;
      if (range === null) {
        applying = true;
        chart.plot.setData(chart.plot.data, true);
        applying = false;
      } else apply();
    },
    /** The x span on screen ({ min, max, timed }), or null before the first update. */
    shown() {
      if (!chart) return null;
      const { min, max } = chart.plot.scales.x;
      return { min, max, timed };
    },
    /** What the origin (the test point's start) and the window's start are, as x values (null when not in the trace). */
    marks() {
      return { origin, windowStart };
    },
    destroy() {
      chart?.destroy();
    },
  };
}

/**
 * The running mean ± U: the mean of the window and its expanded uncertainty as the daemon stated
 * them at each live update (lib/history.js), against the time of the newest sample then; the
 * statement of now drawn across as dashed lines, so the convergence towards it shows.
 * update(points, unit) with points [{ time, mean, U }].
 */
export function convergenceChart(container, timeLabel = 'time of day (24 h, local)') {
  let chart = null;
  let unit = null;
  return {
    update(points, unitCode) {
      const printed = unitText(unitCode) || null;
      const x = points.map((p) => p.time);
      const last = points.at(-1);
      const nowUpper = last && last.U !== null ? last.mean + last.U : null;
      const nowLower = last && last.U !== null ? last.mean - last.U : null;
      const data = [x, points.map((p) => p.mean), points.map((p) => (p.U === null ? null : p.mean + p.U)), points.map((p) => (p.U === null ? null : p.mean - p.U)), x.map(() => nowUpper), x.map(() => nowLower)];
      if (!chart || printed !== unit) {
        unit = printed;
        chart?.destroy();
        refreshPalette();
        chart = makeChart(
          container,
          {
            scales: { x: { time: true } },
            axes: [timeAxis(timeLabel), axis(unit ? `mean (${unit})` : 'mean', { size: 80, values: valueTicks })],
            series: [
              {},
              { label: 'running mean', stroke: COLORS.mean, width: 2, points: { show: false } },
              { label: 'mean + U', stroke: COLORS.bandLine, width: 1, points: { show: false } },
              { label: 'mean − U', stroke: COLORS.bandLine, width: 1, points: { show: false } },
              { label: 'now: mean + U', stroke: COLORS.axis, width: 1, dash: [5, 4], points: { show: false } },
              { label: 'now: mean − U', stroke: COLORS.axis, width: 1, dash: [5, 4], points: { show: false } },
            ],
            bands: [{ series: [2, 3], fill: COLORS.band }],
            plugins: [readoutPlugin(timeText, () => unit ?? '')],
          },
          data,
          240,
        );
      } else chart.plot.setData(data);
    },
    destroy() {
      chart?.destroy();
    },
  };
}

/** The autocorrelation function with the +/-2/sqrt(n) band and the estimator's summation window. */
export function acfChart(container) {
  let markers = { lines: [] };
  let chart = null;
  return {
    update(detail) {
      const acf = detail.acf ?? [];
      const lags = acf.map((_, i) => i + 1);
      const noise = 2 / Math.sqrt(Math.max(1, detail.n));
      const used = detail.estimators?.[detail.estimator];
      markers = { lines: used && used.window > 0 && used.window <= acf.length ? [{ x: used.window, label: `window M = ${used.window}`, color: COLORS.cut }] : [] };
      const data = [lags, acf, lags.map(() => noise), lags.map(() => -noise)];
      if (!chart) {
        refreshPalette();
        chart = makeChart(
          container,
          {
            scales: { x: { time: false }, y: { range: (_u, min, max) => [Math.min(-0.25, min), Math.max(1, max)] } },
            axes: [axis('lag (samples)'), axis('autocorrelation', { size: 56 })],
            series: [
              {},
              { label: 'ρ(lag)', stroke: COLORS.acf, fill: COLORS.acfFill, width: 1, paths: uPlot.paths.bars({ size: [0.7, 24] }), points: { show: false } },
              { label: '+2/√n', stroke: COLORS.noise, width: 1, dash: [3, 3], points: { show: false } },
              { label: '−2/√n', stroke: COLORS.noise, width: 1, dash: [3, 3], points: { show: false } },
            ],
            plugins: [markerPlugin(() => markers), readoutPlugin(plainX('lag'))],
          },
          data,
          240,
        );
      } else chart.plot.setData(data);
    },
    destroy() {
      chart?.destroy();
    },
  };
}

/** Overlapping Allan deviation on log-log axes with its error band, a white-noise slope and the averaging limit. */
export function allanChart(container) {
  let markers = { lines: [] };
  let chart = null;
  let timed = null;
  return {
    update(detail) {
      const points = (detail.allan ?? []).filter((p) => p.adev > 0);
      const isTimed = points.length > 0 && points.every((p) => p.tauSeconds !== null && p.tauSeconds > 0);
      const x = points.map((p) => (isTimed ? p.tauSeconds : p.m));
      const reference = points.length > 0 ? x.map((v) => points[0].adev * Math.sqrt(x[0] / v)) : [];
      const limit = detail.averagingLimit;
      markers = { lines: limit ? [{ x: isTimed && limit.tauSeconds ? limit.tauSeconds : limit.m, label: 'averaging limit', color: COLORS.limit }] : [] };
      const data = [x, points.map((p) => p.adev), points.map((p) => (p.high > 0 ? p.high : null)), points.map((p) => (p.low > 0 ? p.low : null)), reference];
      if (!chart || timed !== isTimed) {
        timed = isTimed;
        chart?.destroy();
        refreshPalette();
        const unit = unitText(detail.unit);
        chart = makeChart(
          container,
          {
            scales: { x: { time: false, distr: 3, log: 10 }, y: { distr: 3, log: 10 } },
            axes: [axis(isTimed ? 'averaging time (s)' : 'averaging factor m', { values: logTicks }), axis(unit ? `Allan deviation (${unit})` : 'Allan deviation', { size: 70, values: logTicks })],
            series: [
              {},
              { label: 'Allan deviation', stroke: COLORS.allan, width: 2, points: { show: true, size: 6 } },
              { label: '1σ high', stroke: COLORS.bandLine, width: 1, points: { show: false } },
              { label: '1σ low', stroke: COLORS.bandLine, width: 1, points: { show: false } },
              { label: 'white-noise slope', stroke: COLORS.reference, width: 1, dash: [4, 4], points: { show: false } },
            ],
            bands: [{ series: [2, 3], fill: COLORS.band }],
            plugins: [markerPlugin(() => markers), readoutPlugin(isTimed ? (v) => `τ ${Number(Number(v).toPrecision(6))} s` : plainX('m'), (series) => (series.label === 'white-noise slope' || !unit ? '' : unit))],
          },
          data,
          240,
        );
      } else chart.plot.setData(data);
    },
    destroy() {
      chart?.destroy();
    },
  };
}

/** The monitor's CUSUM sums on block means (upward positive, downward negative) against +/-h. */
export function cusumChart(container) {
  let chart = null;
  return {
    update(detail) {
      const cusum = detail.cusumTrace;
      const upper = cusum?.upper ?? [];
      const x = upper.map((_, i) => i + 1);
      const h = cusum?.decisionInterval ?? null;
      const data = [x, upper, (cusum?.lower ?? []).map((v) => -v), x.map(() => h), x.map(() => (h === null ? null : -h))];
      if (!chart) {
        refreshPalette();
        chart = makeChart(
          container,
          {
            scales: { x: { time: false } },
            axes: [axis('block'), axis('sum (sd)', { size: 56 })],
            plugins: [readoutPlugin(plainX('block'))],
            series: [
              {},
              { label: 'upward', stroke: COLORS.upper, width: 1.5, points: { show: false } },
              { label: 'downward', stroke: COLORS.lower, width: 1.5, points: { show: false } },
              { label: '+h', stroke: COLORS.decision, width: 1, dash: [5, 4], points: { show: false } },
              { label: '−h', stroke: COLORS.decision, width: 1, dash: [5, 4], points: { show: false } },
            ],
          },
          data,
          240,
        );
      } else chart.plot.setData(data);
    },
    destroy() {
      chart?.destroy();
    },
  };
}
