// Test points: start one over chosen channels, follow its verdict, stop it, add notes, and take
// its record (CSV, JSON; the derived results in a CSV of their own) and the printable report. Writes go through the API with the write key
// when the daemon asks for one; a refusal is shown in words.

import { h, setText, replaceChildren } from '../lib/dom.js';
import { api, recordUrl, derivedRecordUrl, reportUrl, writeKey } from '../lib/api.js';
import { POINT_STATES, stateOf, dateTime, formatResult, trimNumber, formatCount, percent, derivedStateOf, unitSuffix } from '../lib/format.js';

export class TestPointsView {
  constructor(root, app) {
    this.app = app;
    this.details = new Map();
    this.cards = new Map();
    this.nameInput = h('input', { type: 'text', id: 'tp-name', maxlength: '200', placeholder: 'e.g. set point 3, 40 °C inlet', autocomplete: 'off' });
    this.channelList = h('div', { className: 'checklist', id: 'tp-channels' });
    this.derivedList = h('div', { className: 'checklist', id: 'tp-derived' });
    this.message = h('p', { className: 'form-message', role: 'status', id: 'tp-message' });
    this.lock = h('p', { className: 'lock-note', hidden: true });
    this.startButton = h('button', { type: 'submit', className: 'primary', id: 'tp-start', text: 'Start test point' });
    // What the start will take, said in words (a selection is never carried over silently).
    this.chosen = h('p', { className: 'chosen muted', id: 'tp-chosen', 'aria-live': 'polite' });
    const form = h(
      'form',
      { className: 'panel start-form', id: 'tp-form', on: { submit: (e) => this.start(e), change: () => this.updateChosen() } },
      h('h2', { text: 'Start a test point' }),
      h('p', { className: 'muted', text: 'The test point averages each chosen channel from its start, in a window of its own (another test point on the same channel is not disturbed); it is ready when all of them are steady at their target precision.' }),
      h('label', { for: 'tp-name', text: 'Name' }),
      this.nameInput,
      h('div', { className: 'form-row' }, h('span', { className: 'label', text: 'Channels' }), h('button', { type: 'button', className: 'link', text: 'all', on: { click: () => this.selectAll(true) } }), h('button', { type: 'button', className: 'link', text: 'none', on: { click: () => this.selectAll(false) } })),
      this.channelList,
      h('div', { className: 'derived-block' }, h('span', { className: 'label', text: 'Derived results' }), this.derivedList),
      this.lock,
      this.chosen,
      h('div', { className: 'form-row' }, this.startButton),
      this.message,
    );
    this.list = h('div', { className: 'tp-list', id: 'tp-list' });
    this.element = h('section', { className: 'view view-test-points', 'aria-label': 'Test points' }, h('div', { className: 'view-head' }, h('h1', { text: 'Test points' }), h('a', { className: 'records-link', href: '#/records', id: 'tp-records-link', text: 'all records across set points, one CSV →' })), h('div', { className: 'tp-layout' }, form, h('div', { className: 'tp-column' }, this.list)));
    this.element.hidden = true;
    root.appendChild(this.element);
  }

  show(visible) {
    this.element.hidden = !visible;
    if (visible) {
      this.updateChannels();
      this.update();
    }
  }

  updateLock() {
    const needs = this.app.state.server?.writesNeedToken;
    this.lock.hidden = !(needs && !writeKey());
    setText(this.lock, 'This daemon needs the write key for changes: set it with “Write key” at the top.');
  }

  updateChannels() {
    const names = [...this.app.state.channels.keys()].sort((a, b) => a.localeCompare(b));
    const existing = new Set([...this.channelList.querySelectorAll('input')].map((i) => i.value));
    if (names.length !== existing.size || names.some((n) => !existing.has(n))) {
      const checked = new Set([...this.channelList.querySelectorAll('input:checked')].map((i) => i.value));
      replaceChildren(
        this.channelList,
        names.map((name) => h('label', { className: 'check' }, h('input', { type: 'checkbox', value: name, checked: checked.has(name) }), h('span', { text: name }))),
      );
    }
    const derived = this.app.state.server?.derived ?? [];
    if (this.derivedList.childElementCount !== derived.length) {
      replaceChildren(this.derivedList, derived.map((name) => h('label', { className: 'check' }, h('input', { type: 'checkbox', value: name }), h('span', { text: name }))));
    }
    this.derivedList.parentElement.hidden = derived.length === 0;
    this.updateLock();
    this.updateChosen();
  }

  selectAll(on) {
    for (const input of this.channelList.querySelectorAll('input')) input.checked = on;
    this.updateChosen();
  }

  /** The channels and derived results the start would take, in one line. */
  updateChosen() {
    const channels = [...this.channelList.querySelectorAll('input:checked')].map((i) => i.value);
    const derived = [...this.derivedList.querySelectorAll('input:checked')].map((i) => i.value);
    const parts = [];
    if (channels.length) parts.push(`${channels.length} channel${channels.length === 1 ? '' : 's'}: ${channels.join(', ')}`);
    if (derived.length) parts.push(`${derived.length} derived: ${derived.join(', ')}`);
    setText(this.chosen, parts.length ? `Will start over ${parts.join('; ')}.` : 'Nothing chosen yet.');
    this.chosen.classList.toggle('none', parts.length === 0);
  }

  async start(event) {
    event.preventDefault();
    const channels = [...this.channelList.querySelectorAll('input:checked')].map((i) => i.value);
    const derived = [...this.derivedList.querySelectorAll('input:checked')].map((i) => i.value);
    const name = this.nameInput.value.trim();
    if (channels.length === 0 && derived.length === 0) {
      this.say('Choose at least one channel.', true);
      return;
    }
    this.startButton.disabled = true;
    try {
      const { testPoint } = await api.startTestPoint({ channels, ...(derived.length ? { derived } : {}), ...(name ? { name } : {}) });
      // The form starts empty for the next test point: nothing of this one's choice is carried over.
      this.say(`Started ${testPoint.name} over ${[...channels, ...derived].join(', ')}. The form is cleared for the next test point.`, false);
      this.app.upsertTestPoint(testPoint);
      this.nameInput.value = '';
      for (const input of this.derivedList.querySelectorAll('input')) input.checked = false;
      this.selectAll(false);
    } catch (error) {
      this.refused(error);
    } finally {
      this.startButton.disabled = false;
    }
  }

  say(text, bad) {
    this.message.className = `form-message${bad ? ' bad' : ' good'}`;
    setText(this.message, text);
  }

  refused(error, where = this.message) {
    const text = error.status === 401 ? `Refused: ${error.message}. Set the write key (top right) and try again.` : `Refused: ${error.message}`;
    where.className = `form-message bad`;
    setText(where, text);
    if (error.status === 401) this.app.askWriteKey();
  }

  /** Redraws the list from app.state.testPoints (newest first). */
  update() {
    this.updateLock();
    const points = [...this.app.state.testPoints].sort((a, b) => b.createdMs - a.createdMs);
    for (const point of points) {
      let card = this.cards.get(point.id);
      if (!card) {
        card = this.createCard(point);
        this.cards.set(point.id, card);
      }
      this.fill(card, point);
    }
    replaceChildren(this.list, points.length ? points.map((p) => this.cards.get(p.id).element) : h('p', { className: 'empty', text: 'No test point yet.' }));
  }

  createCard(point) {
    const parts = {
      title: h('h3', { className: 'tp-title' }),
      badge: h('span', { className: 'state-word' }),
      meta: h('p', { className: 'muted tp-meta' }),
      verdict: h('ul', { className: 'verdict' }),
      actions: h('div', { className: 'tp-actions' }),
      records: h('div', { className: 'records' }),
      notes: h('ul', { className: 'tp-notes' }),
      message: h('p', { className: 'form-message', role: 'status' }),
      noteInput: h('input', { type: 'text', maxlength: '2000', placeholder: 'note for the record', 'aria-label': 'note' }),
    };
    const stop = h('button', { type: 'button', className: 'danger', dataset: { action: 'stop' }, text: 'Stop', on: { click: () => this.stop(point.id, parts) } });
    const noteButton = h('button', { type: 'button', dataset: { action: 'note' }, text: 'Add note', on: { click: () => this.note(point.id, parts) } });
    const report = h('a', { href: reportUrl(point.id), target: '_blank', rel: 'noopener', className: 'button', dataset: { export: 'report' }, text: 'Report' });
    const csv = h('a', { href: recordUrl(point.id, 'csv'), download: `${point.id}.csv`, className: 'button', dataset: { export: 'csv' }, text: 'CSV' });
    const json = h('a', { href: recordUrl(point.id, 'json'), download: `${point.id}.json`, className: 'button', dataset: { export: 'json' }, text: 'JSON' });
    const derivedCsv = h('a', { href: derivedRecordUrl(point.id), download: `${point.id}-derived.csv`, className: 'button', dataset: { export: 'derived-csv' }, text: 'CSV (derived)', title: 'the derived results of the record, one row each' });
    parts.stop = stop;
    parts.exports = [csv, json];
    parts.derivedCsv = derivedCsv;
    replaceChildren(parts.actions, stop, report, csv, json, derivedCsv, h('span', { className: 'note-form' }, parts.noteInput, noteButton));
    const element = h('article', { className: 'panel tp-card', dataset: { testPoint: point.id } }, h('div', { className: 'tp-head' }, parts.title, parts.badge), parts.meta, parts.verdict, parts.actions, parts.message, parts.records, parts.notes);
    return { element, parts, state: null, recordsFor: null };
  }

  fill(card, point) {
    const p = card.parts;
    const state = POINT_STATES[point.state] ?? POINT_STATES.running;
    setText(p.title, point.name);
    p.badge.className = `state-word ${state.className}`;
    setText(p.badge, `${state.symbol} ${state.label}`);
    card.element.dataset.state = point.state;
    setText(p.meta, `${point.id} · started ${dateTime(point.createdMs)}${point.readyMs ? ` · ready ${dateTime(point.readyMs)}` : ''}${point.stoppedMs ? ` · stopped ${dateTime(point.stoppedMs)}` : ''}`);
    replaceChildren(
      p.verdict,
      (point.verdict ?? []).map((v) => {
        const s = stateOf(v.state);
        return h('li', { className: `chip ${s.className}` }, h('span', { text: `${s.symbol} ` }), h('span', { className: 'chip-name', text: v.channel }), h('span', { text: ` ${s.label.toLowerCase()}` }));
      }),
      this.derivedChips(point),
    );
    p.stop.hidden = point.state === 'stopped';
    const hasRecord = point.state !== 'running' || point.readyMs !== null;
    for (const link of p.exports) link.hidden = !hasRecord;
    p.derivedCsv.hidden = !hasRecord || (point.derived ?? []).length === 0;
    replaceChildren(p.notes, (point.annotations ?? []).map((a) => h('li', {}, h('span', { className: 'time', text: dateTime(a.timeMs) }), h('span', { className: 'note-text', text: a.text }))));
    const key = `${point.state}:${point.readyMs}:${point.stoppedMs}`;
    if (hasRecord && card.recordsFor !== key) {
      card.recordsFor = key;
      this.loadRecords(point.id, p.records);
    }
  }

  /** A chip per derived result of the test point, in the words of its state. */
  derivedChips(point) {
    return (point.derived ?? []).map((name) => {
      const d = this.app.state.derived.get(name);
      const s = d ? derivedStateOf(d) : { symbol: '∅', label: 'NO VALUE YET', className: 'st-stale' };
      return h('li', { className: `chip derived-chip ${s.className}`, dataset: { derived: name } }, h('span', { text: `${s.symbol} ` }), h('span', { className: 'chip-name', text: `ƒ ${name}` }), h('span', { text: ` ${s.label.toLowerCase()}` }));
    });
  }

  /** Refreshes the derived chips of the cards from the live derived results. */
  updateDerivedChips() {
    for (const point of this.app.state.testPoints) {
      if (!(point.derived ?? []).length) continue;
      const card = this.cards.get(point.id);
      if (!card) continue;
      const key = point.derived.map((name) => (this.app.state.derived.has(name) ? derivedStateOf(this.app.state.derived.get(name)).key : 'none')).join('|');
      if (card.derivedKey === key) continue;
      card.derivedKey = key;
      for (const chip of card.parts.verdict.querySelectorAll('.derived-chip')) chip.remove();
      for (const chip of this.derivedChips(point)) card.parts.verdict.appendChild(chip);
    }
  }

  async loadRecords(id, container) {
    try {
      const { records } = await api.testPoint(id);
      const latest = records.at(-1)?.body;
      if (!latest) return;
      replaceChildren(
        container,
        h('h4', { text: `Record (${latest.kind === 'ready' ? 'when ready' : 'at stop'}, ${typeof latest.createdAt === 'string' ? dateTime(Date.parse(latest.createdAt)) : '–'})` }),
        h(
          'table',
          { className: 'table record-table' },
          h('thead', {}, h('tr', {}, ...['channel', 'mean ± U', 'k', 'ν_eff', 'n', 'state'].map((t) => h('th', { text: t })))),
          h(
            'tbody',
            {},
            latest.entries.map((e) => {
              const value = formatResult(e.mean, e.expandedUncertainty);
              return h('tr', { title: e.statement }, h('td', { text: e.channel }), h('td', { text: `${value}${unitSuffix(e.unit)}` }), h('td', { text: trimNumber(e.coverageFactor, 3) }), h('td', { text: trimNumber(e.dof, 3) }), h('td', { text: formatCount(e.n) }), h('td', { text: stateOf(e.state).label.toLowerCase() }));
            }),
          ),
        ),
        (latest.derived ?? []).length === 0
          ? null
          : h(
              'table',
              { className: 'table record-table derived-record-table' },
              h('thead', {}, h('tr', {}, ...['derived result', 'value ± U', 'k', 'ν', 'rows', 'Monte Carlo', 'bootstrap'].map((t) => h('th', { text: t })))),
              h(
                'tbody',
                {},
                latest.derived.map((e) => {
                  const value = formatResult(e.value, e.expandedUncertainty);
                  const mc = !e.monteCarlo ? '–' : e.monteCarlo.error ? 'failed' : e.monteCarlo.validated === null ? '–' : e.monteCarlo.validated ? 'validates' : 'differs';
                  const boot = !e.bootstrap || e.bootstrap.agrees === null ? '–' : e.bootstrap.agrees ? 'agrees' : 'differs';
                  return h('tr', { title: e.statement }, h('td', { text: e.name }), h('td', { text: `${value}${unitSuffix(e.unit)}` }), h('td', { text: trimNumber(e.coverageFactor, 3) }), h('td', { text: trimNumber(e.dof, 3) }), h('td', { text: formatCount(e.rows) }), h('td', { text: mc, title: e.monteCarlo?.note ?? e.monteCarlo?.error ?? '' }), h('td', { text: boot, title: e.bootstrap?.note ?? '' }));
                }),
              ),
            ),
        h('p', { className: 'muted small', text: `Coverage probability ${latest.entries[0] ? percent(latest.entries[0].confidence) : latest.derived?.[0] ? percent(latest.derived[0].confidence) : '–'}; hover a row for the full statement.` }),
      );
    } catch (error) {
      setText(container, `Could not load the record: ${error.message}`);
    }
  }

  async stop(id, parts) {
    parts.stop.disabled = true;
    try {
      const { testPoint } = await api.stopTestPoint(id);
      this.app.upsertTestPoint(testPoint);
      setText(parts.message, '');
    } catch (error) {
      this.refused(error, parts.message);
    } finally {
      parts.stop.disabled = false;
    }
  }

  async note(id, parts) {
    const text = parts.noteInput.value.trim();
    if (!text) return;
    try {
      const { testPoint } = await api.annotate(id, text);
      parts.noteInput.value = '';
      this.app.upsertTestPoint(testPoint);
      setText(parts.message, '');
    } catch (error) {
      this.refused(error, parts.message);
    }
  }
}
