// The log beside the sheet: events newest first, alerts marked in words and a glyph as well as
// colour. An alert is acknowledged in two steps: "Acknowledge…" opens a line with an optional note,
// then "Confirm" writes it (a write: it needs the write key when the daemon asks for one) and
// "Cancel" leaves the alert open. An event's source is a link when it is a channel or a derived
// result, plain text otherwise (the daemon, a test point).

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
    this.element = h('aside', { className: 'feed', 'aria-label': 'Log of events' }, h('div', { className: 'feed-head' }, h('h2', { text: 'Log' }), this.toggle), this.message, this.list);
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
      // A note being typed is not thrown away by a new event: the log waits for it.
      if (this.holding !== null && this.holding !== undefined) return;
      this.renderNow();
    });
  }

  renderNow() {
    const { events, acknowledgements, server } = this.app.state;
    const alertKinds = new Set(server?.alertKinds ?? []);
    const items = [];
    for (const event of events) {
      if (event.kind === 'alert-acknowledged') continue;
      const info = describeEvent(event, this.app.state.channels.get(event.source)?.unit ?? null);
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
        ? h('span', { className: 'ack-done', text: `✓ acknowledged ${clockTime(ack.timeMs)}${ack.note ? `: ${ack.note}` : ''}` })
        : this.ackControl(event.id);
    }
    return h(
      'li',
      { className: `feed-item sev-${info.severity}${isAlert && !ack ? ' open' : ''}`, dataset: { eventId: String(event.id), kind: event.kind } },
      h('div', { className: 'feed-line' }, h('span', { className: 'time', text: clockTime(event.timeMs) }), h('span', { className: 'sev', text: `${severity.symbol} ${severity.label}` }), h('span', { className: 'title', text: info.title })),
      this.source(event.source),
      info.detail ? h('div', { className: 'feed-detail', text: info.detail }) : null,
      action,
    );
  }

  /** The source as a link to its view when there is one. */
  source(name) {
    const { channels, derived } = this.app.state;
    if (channels.has(name)) return h('a', { className: 'feed-source', href: `#/channel/${encodeURIComponent(name)}`, text: name });
    if (derived.has(name)) return h('a', { className: 'feed-source', href: `#/derived/${encodeURIComponent(name)}`, text: `ƒ ${name}` });
    return h('span', { className: 'feed-source plain', text: name });
  }

  /** "Acknowledge…", then a note and Confirm / Cancel. */
  ackControl(id) {
    const holder = h('div', { className: 'ack-control' });
    const open = h('button', { type: 'button', className: 'ack', dataset: { eventId: String(id) }, text: 'Acknowledge…' });
    holder.appendChild(open);
    open.addEventListener('click', () => {
      const note = h('input', { type: 'text', className: 'ack-note', maxlength: '500', placeholder: 'note (optional): what was done', 'aria-label': 'note to the acknowledgement' });
      const confirm = h('button', { type: 'button', className: 'ack-confirm primary', text: 'Confirm' });
      const cancel = h('button', { type: 'button', className: 'ack-cancel', text: 'Cancel' });
      const form = h('form', { className: 'ack-form' }, note, confirm, cancel);
      form.addEventListener('submit', (e) => e.preventDefault());
      confirm.addEventListener('click', () => this.acknowledge(id, confirm, note.value.trim()));
      note.addEventListener('keydown', (e) => {
        if (e.key === 'Enter') this.acknowledge(id, confirm, note.value.trim());
        if (e.key === 'Escape') cancel.click();
      });
      cancel.addEventListener('click', () => {
        holder.replaceChildren(open);
        this.holding = null;
        open.focus();
        this.render();
      });
      holder.replaceChildren(form);
      this.holding = id;
      note.focus();
    });
    return holder;
  }

  async acknowledge(id, button, note) {
    button.disabled = true;
    try {
      const { acknowledgement } = await api.acknowledge(id, note);
      this.holding = null;
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
