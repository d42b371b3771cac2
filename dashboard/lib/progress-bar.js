// The ruler towards a target, in the sheet's entries and in the detail views: a thin scale with
// ticks at quarters, filled to the fraction of the samples needed that have been taken. Hidden
// while there is nothing to measure (no target, or the channel not steady).

import { h } from './dom.js';

export class ProgressBar {
  /** label: what the ruler measures, for assistive technology. */
  constructor(label) {
    this.fill = h('span', { className: 'ruler-fill' });
    this.element = h('span', { className: 'ruler', role: 'progressbar', 'aria-valuemin': '0', 'aria-valuemax': '100', 'aria-label': label }, this.fill, h('span', { className: 'ruler-ticks', 'aria-hidden': 'true' }));
  }

  /** fraction: 0…1 of the samples needed (null: nothing to show); reached: drawn as met. */
  show(fraction, reached) {
    const shown = fraction !== null && fraction !== undefined && Number.isFinite(fraction);
    this.element.hidden = !shown;
    if (!shown) {
      this.element.removeAttribute('aria-valuenow');
      return;
    }
    this.fill.style.width = `${(fraction * 100).toFixed(1)}%`;
    this.element.className = `ruler${reached ? ' met' : ''}`;
    this.element.setAttribute('aria-valuenow', String(Math.round(fraction * 100)));
  }
}
