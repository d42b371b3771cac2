// The uncertainty budget of a derived result as a chart: SVG built through the DOM, every label a
// text node. One bar per term of u_c², as a share of it: each input's variance term c_i² u²(x_i)
// (solid), each pair's covariance term 2 c_i c_j u(x_i, x_j) (hatched; a negative one is drawn left
// of zero, since it takes away from u_c²), and their sum, 100 %. When the inputs are correlated the
// variance terms alone can exceed 100 % many times over, cancelled by negative covariance terms: the
// chart shows that as it is rather than rescaling it away.

const SVG = 'http://www.w3.org/2000/svg';
const ROW = 26;
const VALUE_COLUMN = 78;
const CHARACTER_WIDTH = 7;
// The SVG takes its colours from the sheet's CSS variables (light and dark).
const VARIABLES = { variance: '--chart-mean', positive: '--warming', negative: '--unsteady', total: '--ink-faint', axis: '--ink-soft', grid: '--chart-grid', text: '--ink', rule: '--rule' };
function colors() {
  const style = getComputedStyle(document.documentElement);
  return Object.fromEntries(Object.entries(VARIABLES).map(([key, name]) => [key, style.getPropertyValue(name).trim() || '#555']));
}

let charts = 0;

function el(tag, attributes, ...children) {
  const node = document.createElementNS(SVG, tag);
  for (const [key, value] of Object.entries(attributes ?? {})) if (value !== undefined && value !== null) node.setAttribute(key, String(value));
  for (const child of children) if (child !== null && child !== undefined) node.appendChild(typeof child === 'string' ? document.createTextNode(child) : child);
  return node;
}

function trim(value, digits) {
  if (value === null || value === undefined || !Number.isFinite(value)) return '–';
  if (value !== 0 && (Math.abs(value) >= 1e9 || Math.abs(value) < 1e-5)) return value.toExponential(Math.max(0, digits - 2));
  return String(Number(value.toPrecision(digits)));
}

function percentText(value) {
  const sign = value < 0 ? '−' : value > 0 && value !== 100 ? '+' : '';
  return `${sign}${trim(Math.abs(value), 3)} %`;
}

/**
 * The terms of u_c² of a derived result (as GET /api/derived gives it), each as a share of u_c²
 * in percent; empty when u_c is zero or unknown. kind: variance, covariance-positive,
 * covariance-negative, total.
 */
export function budgetTerms(d) {
  const u = d?.standardUncertainty;
  if (!(u > 0) || !Number.isFinite(u)) return [];
  const u2 = u * u;
  const terms = [];
  for (const b of d.budget ?? []) {
    if (b.varianceShare === null || !Number.isFinite(b.varianceShare)) continue;
    terms.push({ kind: 'variance', label: b.channel, percent: 100 * b.varianceShare, detail: `${b.channel}: c_i²·u²(x_i) with c_i = ${trim(b.sensitivity, 4)}, u(x_i) = ${trim(b.standardUncertainty, 3)}, c_i·u(x_i) = ${trim(b.contribution, 3)}` });
  }
  for (const c of d.covarianceTerms ?? []) {
    const percent = (100 * c.term) / u2;
    if (!Number.isFinite(percent)) continue;
    terms.push({ kind: percent < 0 ? 'covariance-negative' : 'covariance-positive', label: `${c.channels[0]} × ${c.channels[1]}`, percent, detail: `covariance term 2·c_i·c_j·u(x_i, x_j) = ${trim(c.term, 3)}; correlation of the means r = ${trim(c.correlation, 3)}` });
  }
  terms.push({ kind: 'total', label: 'u_c² (the sum)', percent: 100, detail: `u_c = ${trim(u, 3)}${d.unit ? ` ${d.unit}` : ''}: the terms above add to 100 %` });
  return terms;
}

/** Tick values on [low, high] with a 1-2-5 step, about six of them. */
function ticks(low, high) {
  const span = high - low;
  const magnitude = 10 ** Math.floor(Math.log10(span / 5));
  const step = [1, 2, 5, 10].map((m) => m * magnitude).find((s) => span / s <= 7) ?? 10 * magnitude;
  const out = [];
  for (let v = Math.ceil(low / step) * step; v <= high + step * 1e-9; v += step) out.push(Math.abs(v) < step * 1e-9 ? 0 : v);
  return out;
}

function shorten(label, max) {
  if (label.length <= max) return label;
  const head = Math.ceil((max - 1) / 2);
  return `${label.slice(0, head)}…${label.slice(label.length - (max - 1 - head))}`;
}

/** A chart in `container`; update(d) redraws it for a derived result, and it follows the container's width. */
export function budgetChart(container) {
  const id = ++charts;
  let current = null;
  let width = 0;
  const draw = () => {
    width = Math.max(320, container.clientWidth - 4);
    const terms = budgetTerms(current);
    while (container.firstChild) container.removeChild(container.firstChild);
    if (terms.length === 0) {
      const empty = document.createElement('p');
      empty.className = 'chart-note';
      empty.textContent = 'No budget yet: the combined standard uncertainty is zero or not known.';
      container.appendChild(empty);
      return;
    }
    const longest = Math.max(...terms.map((t) => t.label.length));
    const labelWidth = Math.round(Math.min(width * 0.4, Math.max(90, longest * CHARACTER_WIDTH + 14)));
    // The legend: from the plot's left edge when it fits there, else from the left, wrapped into
    // as many rows as the width needs (a narrow panel must not cut its last words).
    const legend = [
      ['variance of an input', colors().variance, null],
      ['covariance, adds to u_c²', `url(#budget-positive-${id})`, colors().positive],
      ['covariance, takes away from u_c²', `url(#budget-negative-${id})`, colors().negative],
    ];
    const itemWidth = (text) => 34 + text.length * 6.4;
    const legendWidth = legend.reduce((sum, [text]) => sum + itemWidth(text), 0) - 15;
    const legendStart = legendWidth <= width - labelWidth ? labelWidth : 0;
    const legendPlaces = [];
    let legendX = legendStart;
    let legendRow = 0;
    for (const [text] of legend) {
      if (legendX > legendStart && legendX + itemWidth(text) - 15 > width) {
        legendRow++;
        legendX = legendStart;
      }
      legendPlaces.push({ x: legendX, y: 6 + legendRow * 18 });
      legendX += itemWidth(text);
    }
    const top = 46 + legendRow * 18;
    const plotWidth = width - labelWidth - VALUE_COLUMN - 8;
    const plotHeight = terms.length * ROW;
    const height = top + plotHeight + 40;
    let low = Math.min(0, ...terms.map((t) => t.percent));
    let high = Math.max(100, ...terms.map((t) => t.percent));
    const pad = (high - low) * 0.03;
    if (low < 0) low -= pad;
    high += pad;
    const px = (v) => labelWidth + ((v - low) / (high - low)) * plotWidth;
    const hatch = (name, color) =>
      el('pattern', { id: `budget-${name}-${id}`, patternUnits: 'userSpaceOnUse', width: 7, height: 7, patternTransform: 'rotate(45)' }, el('rect', { width: 7, height: 7, fill: color, 'fill-opacity': 0.35 }), el('line', { x1: 0, y1: 0, x2: 0, y2: 7, stroke: color, 'stroke-width': 3 }));
    const fills = { variance: colors().variance, 'covariance-positive': `url(#budget-positive-${id})`, 'covariance-negative': `url(#budget-negative-${id})`, total: colors().total };
    const strokes = { 'covariance-positive': colors().positive, 'covariance-negative': colors().negative };
    const svg = el('svg', { class: 'budget-svg', width, height, viewBox: `0 0 ${width} ${height}`, role: 'img', 'aria-label': `Uncertainty budget of ${current.name}: each term as a share of u_c²` });
    svg.appendChild(el('defs', {}, hatch('positive', colors().positive), hatch('negative', colors().negative)));
    legend.forEach(([text, fill, stroke], i) => {
      const { x, y } = legendPlaces[i];
      svg.appendChild(el('rect', { x, y, width: 14, height: 11, fill, stroke: stroke ?? undefined }));
      svg.appendChild(el('text', { x: x + 19, y: y + 10, 'font-size': 12, fill: colors().text }, text));
    });
    // Grid and ticks.
    svg.appendChild(el('rect', { x: labelWidth, y: top, width: plotWidth, height: plotHeight, fill: 'none', stroke: colors().rule }));
    for (const tick of ticks(low, high)) {
      const tx = px(tick);
      svg.appendChild(el('line', { x1: tx, x2: tx, y1: top, y2: top + plotHeight, stroke: colors().grid }));
      svg.appendChild(el('text', { x: tx, y: top + plotHeight + 15, 'text-anchor': 'middle', 'font-size': 11, fill: colors().axis }, `${trim(tick, 4)} %`));
    }
    const maxCharacters = Math.max(6, Math.floor((labelWidth - 14) / CHARACTER_WIDTH));
    terms.forEach((term, i) => {
      const y = top + i * ROW;
      const a = px(Math.min(0, term.percent));
      const b = px(Math.max(0, term.percent));
      svg.appendChild(
        el(
          'g',
          { class: `budget-row ${term.kind}`, 'data-kind': term.kind, 'data-label': term.label },
          el('title', {}, `${term.label}: ${percentText(term.percent)} of u_c². ${term.detail}`),
          el('text', { x: labelWidth - 8, y: y + 17, 'text-anchor': 'end', 'font-size': 12, fill: colors().text }, shorten(term.label, maxCharacters)),
          el('rect', { class: 'budget-bar', x: a, y: y + 5, width: Math.max(1, b - a), height: ROW - 10, fill: fills[term.kind], stroke: strokes[term.kind], 'stroke-width': strokes[term.kind] ? 1.2 : undefined, 'data-percent': term.percent }),
          el('text', { x: width - 4, y: y + 17, 'text-anchor': 'end', 'font-size': 12, 'font-weight': term.kind === 'total' ? 700 : 400, fill: term.kind === 'covariance-negative' ? colors().negative : colors().text }, percentText(term.percent)),
        ),
      );
    });
    svg.appendChild(el('line', { x1: px(0), x2: px(0), y1: top, y2: top + plotHeight, stroke: colors().text, 'stroke-width': 1.2 }));
    svg.appendChild(el('line', { x1: px(100), x2: px(100), y1: top - 4, y2: top + plotHeight, stroke: colors().total, 'stroke-dasharray': '4 3' }));
    svg.appendChild(el('text', { x: px(100), y: top - 8, 'text-anchor': 'middle', 'font-size': 11, fill: colors().axis }, 'u_c² = 100 %'));
    svg.appendChild(el('text', { x: labelWidth + plotWidth / 2, y: height - 6, 'text-anchor': 'middle', 'font-size': 12, fill: colors().axis }, 'share of u_c² (%)'));
    container.appendChild(svg);
  };
  const observer = new ResizeObserver(() => {
    if (current && Math.max(320, container.clientWidth - 4) !== width) draw();
  });
  observer.observe(container);
  return {
    update(d) {
      current = d;
      draw();
    },
    destroy() {
      observer.disconnect();
    },
  };
}
