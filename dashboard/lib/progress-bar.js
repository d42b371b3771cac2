// The bar towards a target, in the tiles and in the detail views.

import { h } from './dom.js';

export class ProgressBar {
  /** label: what the bar measures, for assistive technology. */
  constructor(label) {
    this.fill = h('span', { className: 'bar-fill' });
    this.element = h('div', { className: 'bar', role: 'progressbar', 'aria-valuemin': '0', 'aria-valuemax': '100', 'aria-label': label }, this.fill);
  }

  /** fraction: 0…1 of the way to the target; reached: drawn as done. */
  show(fraction, reached) {
    this.fill.style.width = `${(fraction * 100).toFixed(1)}%`;
    this.element.className = `bar${reached ? ' done' : ''}`;
    this.element.setAttribute('aria-valuenow', String(Math.round(fraction * 100)));
  }
}
