// What the views of one item (a channel, a derived result) share: open on a name, reload every two
// seconds while the page is visible, show a failed load in the view's error line, and on close stop
// the reloads and free the charts. A view supplies build(name), load(name) and render(detail), and
// keeps its charts in this.charts and its error line in this.parts.error.

import { h, setText } from './dom.js';

const REFRESH_MS = 2000;

export class DetailView {
  constructor(root, app, className, label) {
    this.app = app;
    this.name = null;
    this.timer = null;
    this.charts = [];
    this.loading = false;
    this.element = h('section', { className: `view ${className}`, 'aria-label': label });
    this.element.hidden = true;
    root.appendChild(this.element);
  }

  open(name) {
    if (this.name === name && !this.element.hidden) return;
    this.close();
    this.name = name;
    this.element.hidden = false;
    this.build(name);
    this.refresh();
    this.timer = setInterval(() => {
      if (document.visibilityState === 'visible') this.refresh();
    }, REFRESH_MS);
  }

  close() {
    clearInterval(this.timer);
    this.timer = null;
    for (const chart of this.charts) chart.destroy();
    this.charts = [];
    this.name = null;
    this.element.hidden = true;
  }

  async refresh() {
    if (!this.name || this.loading) return;
    const name = this.name;
    this.loading = true;
    try {
      const detail = await this.load(name);
      if (this.name !== name) return;
      setText(this.parts.error, '');
      this.render(detail);
    } catch (error) {
      if (this.name === name) setText(this.parts.error, `Could not load ${name}: ${error.message}`);
    } finally {
      this.loading = false;
    }
  }
}
