// The event feed: newest first, alerts marked in words and colour, each alert with a button to
// acknowledge it (a write: it needs the write key when the daemon asks for one).

import { h, setText, replaceChildren } from '../lib/dom.js';
import { api } from '../lib/api.js';
import { describeEvent, SEVERITY, clockTime } from '../lib/format.js';

const SHOWN = 150;

export class FeedView {
  constructor(root, app) {
    this.app = app;
    this.alertsOnly = false;
    this.pending = false;
    this.list = h('ol', { className: 'feed-list', id: 'feed-list', 'aria-live': 'polite' });
    this.message = h('p', { className: 'form-message', role: 'status' });
    this.toggle = h('button', { type: 'button', className: 'link', id: 'feed-filter', text: 'alerts only', 'aria-pressed': 'false', on: { click: () => this.toggleFilter() } });
    this.element = h('aside', { className: 'feed', 'aria-label': 'Events' }, h('div', { className: 'feed-head' }, h('h2', { text: 'Events' }), this.toggle), this.message, this.list);
    root.appendChild(this.element);
  }

  toggleFilter() {
    this.alertsOnly = !this.alertsOnly;
    this.toggle.setAttribute('aria-pressed', String(this.alertsOnly));
    setText(this.toggle, this.alertsOnly ? 'show all' : 'alerts only');
    this.render();
  }

  /** Renders on the next frame: a burst of events costs one render. */
  render() {
    if (this.pending) return;
    this.pending = true;
    requestAnimationFrame(() => {
      this.pending = false;
      this.renderNow();
    });
  }

  renderNow() {
    const { events, acknowledgements, server } = this.app.state;
    const alertKinds = new Set(server?.alertKinds ?? []);
    const items = [];
    for (const event of events) {
      if (event.kind === 'alert-acknowledged') continue;
      const info = describeEvent(event);
      const isAlert = alertKinds.has(event.kind) || info.severity === 'alert';
      if (this.alertsOnly && !isAlert) continue;
      items.push(this.item(event, info, isAlert, acknowledgements.get(event.id)));
      if (items.length >= SHOWN) break;
    }
    replaceChildren(this.list, items.length ? items : h('li', { className: 'muted', text: this.alertsOnly ? 'No alerts.' : 'No events yet.' }));
  }

  item(event, info, isAlert, ack) {
    const severity = SEVERITY[info.severity];
    let action = null;
    if (isAlert) {
      action = ack
        ? h('span', { className: 'ack-done', text: `✓ acknowledged ${clockTime(ack.timeMs)}` })
        : h('button', { type: 'button', className: 'ack', dataset: { eventId: String(event.id) }, text: 'Acknowledge', on: { click: (e) => this.acknowledge(event.id, e.currentTarget) } });
    }
    return h(
      'li',
      { className: `feed-item sev-${info.severity}${isAlert && !ack ? ' open' : ''}`, dataset: { eventId: String(event.id), kind: event.kind } },
      h('div', { className: 'feed-line' }, h('span', { className: 'time', text: clockTime(event.timeMs) }), h('span', { className: 'sev', text: `${severity.symbol} ${severity.label}` }), h('span', { className: 'title', text: info.title })),
      h('div', { className: 'feed-source', text: event.source }),
      info.detail ? h('div', { className: 'feed-detail', text: info.detail }) : null,
      action,
    );
  }

  async acknowledge(id, button) {
    button.disabled = true;
    try {
      const { acknowledgement } = await api.acknowledge(id);
      this.app.noteAcknowledgement(acknowledgement);
      setText(this.message, '');
    } catch (error) {
      button.disabled = false;
      this.message.className = 'form-message bad';
      setText(this.message, error.status === 401 ? `Refused: ${error.message}. Set the write key first.` : `Refused: ${error.message}`);
      if (error.status === 401) this.app.askWriteKey();
    }
  }
}
