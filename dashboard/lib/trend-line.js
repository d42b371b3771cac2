// The trend line of a sheet entry: a small SVG line of the last values the page has seen
// (lib/history.js), scaled to their own range, with that range in words for a reader and for
// assistive technology. Built with the DOM (createElementNS), never from markup.

import { formatValue, unitSuffix } from './format.js';

const SVG = 'http://www.w3.org/2000/svg';
const WIDTH = 120;
const HEIGHT = 22;

export class TrendLine {
  constructor() {
    this.svg = document.createElementNS(SVG, 'svg');
    this.svg.setAttribute('class', 'trend-line');
    this.svg.setAttribute('viewBox', `0 0 ${WIDTH} ${HEIGHT}`);
    this.svg.setAttribute('width', String(WIDTH));
    this.svg.setAttribute('height', String(HEIGHT));
    this.svg.setAttribute('role', 'img');
    this.line = document.createElementNS(SVG, 'polyline');
    this.line.setAttribute('fill', 'none');
    this.line.setAttribute('stroke-width', '1.2');
    this.line.setAttribute('vector-effect', 'non-scaling-stroke');
    this.end = document.createElementNS(SVG, 'circle');
    this.end.setAttribute('r', '2');
    this.svg.append(this.line, this.end);
    // The tooltip is the wrapper's title attribute (an SVG <title> would be a text node on the page).
    this.element = document.createElement('span');
    this.element.className = 'trend-wrap';
    this.element.appendChild(this.svg);
    this.drawnMs = 0;
  }

  /** points: [{ time, value }] oldest first; decimals: those of the entry's statement (null: 7 significant digits). */
  show(points, unit, decimals) {
    const now = Date.now();
    // At most once a second, and the last call of a burst is drawn when the second is over.
    clearTimeout(this.timer);
    if (now - this.drawnMs < 1000) {
      this.timer = setTimeout(() => this.show(points, unit, decimals), 1000 - (now - this.drawnMs));
      return;
    }
    this.drawnMs = now;
    const values = points.map((p) => p.value);
    this.svg.dataset.points = String(values.length);
    if (values.length < 2) {
      this.line.setAttribute('points', '');
      this.end.setAttribute('r', '0');
      const text = 'trend: too few values seen yet';
      this.svg.setAttribute('aria-label', text);
      this.element.title = text;
      return;
    }
    let min = Infinity;
    let max = -Infinity;
    for (const v of values) {
      if (v < min) min = v;
      if (v > max) max = v;
    }
    const span = max - min || 1;
    const t0 = points[0].time;
    const dt = points.at(-1).time - t0 || 1;
    const xy = points.map((p) => [((p.time - t0) / dt) * (WIDTH - 4) + 2, HEIGHT - 2 - ((p.value - min) / span) * (HEIGHT - 4)]);
    this.line.setAttribute('points', xy.map(([x, y]) => `${x.toFixed(1)},${y.toFixed(1)}`).join(' '));
    const [ex, ey] = xy.at(-1);
    this.end.setAttribute('cx', ex.toFixed(1));
    this.end.setAttribute('cy', ey.toFixed(1));
    this.end.setAttribute('r', '2');
    const u = unitSuffix(unit);
    const text = `trend of the last ${values.length} values seen: from ${formatValue(min, decimals)}${u} to ${formatValue(max, decimals)}${u}, now ${formatValue(values.at(-1), decimals)}${u}`;
    this.svg.setAttribute('aria-label', text);
    this.element.title = text;
  }
}
