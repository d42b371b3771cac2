// The records page: every test point's records, one block per test point (in order of creation)
// with its set points, and per record a table of its channels and derived results: the statement
// "mean ± U" with its unit, k and the coverage probability, ν_eff, the samples (or rows) behind
// it, whether it is a result or provisional (and why), and the conformity outcome. One CSV of all
// of them comes from the daemon (GET /api/records.csv), linked at the top with the caution.

import { h, setText, replaceChildren, breakable } from '../lib/dom.js';
import { api, recordsCsvUrl } from '../lib/api.js';
import { POINT_STATES, dateTime, formatResult, trimNumber, formatCount, percent, unitSuffix } from '../lib/format.js';

export class RecordsView {
  constructor(root, app) {
    this.app = app;
    this.loading = false;
    this.again = false;
    this.seen = '';
    this.summary = h('p', { className: 'sheet-summary', 'aria-live': 'polite' });
    this.caution = h('p', { className: 'records-caution' });
    this.message = h('p', { className: 'error', role: 'alert' });
    this.list = h('div', { className: 'records-list', id: 'records-list' });
    this.across = h('div', { className: 'panel records-across', id: 'records-across', hidden: true });
    this.csv = h('a', { className: 'button', id: 'records-csv', href: recordsCsvUrl(), download: 'plateau-records.csv', dataset: { export: 'all-csv' }, text: 'CSV of all records' });
    this.element = h(
      'section',
      { className: 'view view-records', 'aria-label': 'Records' },
      h('div', { className: 'view-head' }, h('a', { className: 'back', href: '#/test-points', text: '← test points' }), h('h1', { text: 'Records' }), this.summary),
      h('div', { className: 'records-tools' }, this.csv, h('span', { className: 'muted small', text: 'one CSV of every record below: a row per channel and per derived result, with its test point and set points, and the caution in every row' })),
      this.caution,
      this.message,
      this.across,
      this.list,
    );
    this.element.hidden = true;
    root.appendChild(this.element);
  }

  show(visible) {
    this.element.hidden = !visible;
    if (visible) this.load();
  }

  /** Reloads when the test points changed (a record is written when one is ready or stops). */
  testPointsChanged() {
    if (this.element.hidden) return;
    const key = this.app.state.testPoints.map((p) => `${p.id}:${p.state}:${p.readyMs}:${p.stoppedMs}`).join('|');
    if (key !== this.seen) this.load();
  }

  async load() {
    if (this.loading) {
      this.again = true;
      return;
    }
    this.loading = true;
    this.seen = this.app.state.testPoints.map((p) => `${p.id}:${p.state}:${p.readyMs}:${p.stoppedMs}`).join('|');
    try {
      const { testPoints, caution } = await api.records();
      setText(this.message, '');
      setText(this.caution, `Caution: ${caution}`);
      this.render(testPoints);
    } catch (error) {
      setText(this.message, `Could not load the records: ${error.message}`);
    } finally {
      this.loading = false;
      if (this.again) {
        this.again = false;
        this.load();
      }
    }
  }

  render(testPoints) {
    const withRecords = testPoints.filter((t) => t.records.length > 0);
    const count = withRecords.reduce((sum, t) => sum + t.records.length, 0);
    setText(this.summary, count === 0 ? 'no record yet' : `${formatCount(count)} ${count === 1 ? 'record' : 'records'} of ${formatCount(withRecords.length)} ${withRecords.length === 1 ? 'test point' : 'test points'}`);
    this.csv.hidden = count === 0;
    renderAcross(this.across, withRecords);
    replaceChildren(this.list, count === 0 ? h('p', { className: 'empty', text: 'No record yet: a test point writes one when it is ready and when it stops.' }) : withRecords.map((t) => testPointBlock(t, this.app)));
  }
}

/**
 * Across set points: one row per quantity, one column per test point, each cell the statement of
 * the test point's latest record (a provisional one in italics with ↗), so that a calibration's
 * points read across.
 */
function renderAcross(container, withRecords) {
  container.hidden = withRecords.length === 0;
  if (withRecords.length === 0) return;
  const latest = withRecords.map((t) => ({ point: t.testPoint, record: t.records.at(-1)?.body ?? {} }));
  const quantities = [];
  const cells = new Map();
  latest.forEach(({ record }, column) => {
    const add = (kind, name, unit, value, e) => {
      const key = `${kind}:${name}`;
      if (!cells.has(key)) {
        cells.set(key, []);
        quantities.push({ key, kind, name });
      }
      cells.get(key)[column] = { unit, value, e };
    };
    for (const e of Array.isArray(record.entries) ? record.entries : []) add('channel', e.channel, e.unit, e.mean, e);
    for (const e of Array.isArray(record.derived) ? record.derived : []) if (e && typeof e.name === 'string') add('derived', e.name, e.unit, e.value, e);
  });
  replaceChildren(
    container,
    h('h2', { text: 'Across set points' }),
    h('p', { className: 'muted small', text: 'The latest record of each test point: mean ± U (k as in its record below); ↗ marks a provisional result.' }),
    h(
      'div',
      { className: 'table-scroll' },
      h(
        'table',
        { className: 'table across-table' },
        h('thead', {}, h('tr', {}, h('th', { text: 'quantity' }), latest.map(({ point }) => h('th', { className: 'across-point', dataset: { testPoint: point.id }, text: point.name })))),
        h(
          'tbody',
          {},
          quantities.map((q) =>
            h(
              'tr',
              { dataset: { quantity: q.name, kind: q.kind } },
              h('td', { className: 'quantity' }, q.kind === 'derived' ? h('span', { className: 'derived-mark', text: 'ƒ ', 'aria-hidden': 'true' }) : null, breakable(q.name)),
              latest.map((_, column) => {
                const cell = cells.get(q.key)[column];
                if (!cell) return h('td', { className: 'muted', text: '–' });
                const c = cell.e.combined ?? null;
                const text = formatResult(c ? c.value : cell.value, c ? c.expandedUncertainty : cell.e.expandedUncertainty, unitSuffix(cell.unit));
                const provisional = cell.e.provisional === true;
                return h('td', { className: `across-cell${provisional ? ' provisional' : ''}`, title: cell.e.statement ?? '', text: provisional ? `↗ ${text}` : text });
              }),
            ),
          ),
        ),
      ),
    ),
  );
}

function testPointBlock({ testPoint, records }, app) {
  const state = POINT_STATES[testPoint.state] ?? POINT_STATES.running;
  const setPoints = Object.entries(testPoint.setPoints ?? {});
  const unitOf = (channel) => app.state.channels.get(channel)?.unit ?? null;
  return h(
    'section',
    { className: 'record-block panel', dataset: { testPoint: testPoint.id } },
    h('div', { className: 'tp-head' }, h('h2', { className: 'tp-title', text: testPoint.name }), h('span', { className: `state-word ${state.className}`, text: `${state.symbol} ${state.label}` })),
    h(
      'p',
      { className: 'muted tp-meta' },
      `${testPoint.id} · started ${dateTime(testPoint.createdMs)} · `,
      setPoints.length === 0 ? 'no set point given' : `set points: ${setPoints.map(([channel, value]) => `${channel} = ${trimNumber(value, 7)}${unitSuffix(unitOf(channel))}`).join(', ')}`,
    ),
    records.map((row) => recordTable(row)),
  );
}

function recordTable(row) {
  const record = row.body ?? {};
  const entries = Array.isArray(record.entries) ? record.entries : [];
  const derived = Array.isArray(record.derived) ? record.derived.filter((d) => d && typeof d.name === 'string') : [];
  const number = record.recordNumber ?? String(row.id);
  const confidence = entries[0]?.confidence ?? derived[0]?.confidence ?? null;
  return h(
    'div',
    { className: 'record', dataset: { record: number } },
    h(
      'h3',
      { className: 'record-title' },
      `Record ${number} · ${record.kind === 'ready' ? 'when ready' : 'at stop'} · ${typeof record.createdAt === 'string' ? dateTime(Date.parse(record.createdAt)) : '–'}`,
      record.provisional ? h('span', { className: 'provisional-mark', text: ' · provisional' }) : null,
    ),
    h(
      'div',
      { className: 'table-scroll' },
      h(
        'table',
        { className: 'table records-table' },
        h('thead', {}, h('tr', {}, ...['quantity', 'mean ± U', 'k', 'ν_eff', 'samples', 'result', 'conformity'].map((t) => h('th', { text: t })))),
        h(
          'tbody',
          {},
          entries.map((e) => resultRow({ kind: 'channel', name: e.channel, unit: e.unit, value: e.mean, e, count: `${formatCount(e.n)} samples` })),
          derived.map((e) => resultRow({ kind: 'derived', name: e.name, unit: e.unit, value: e.value, e, count: `${formatCount(e.rows)} rows` })),
        ),
      ),
    ),
    h('p', { className: 'muted small', text: `${confidence === null ? '' : `Coverage probability ${percent(confidence)}. `}U is the expanded uncertainty (with the Type B components where the channel has them: “A + B”); hover a row for the full statement.` }),
  );
}

function resultRow({ kind, name, unit, value, e, count }) {
  // The combined uncertainty (Type A with Type B) states the result where it is configured.
  const c = e.combined ?? null;
  const shown = c ? { value: c.value, U: c.expandedUncertainty, k: c.coverageFactor, dof: c.dof } : { value, U: e.expandedUncertainty, k: e.coverageFactor, dof: e.dof };
  const typeB = Boolean(c?.budget?.some((b) => b.evaluation === 'B'));
  const provisional = e.provisional === true;
  const reasons = (e.provisionalReasons ?? []).join('; ');
  const f = e.conformity ?? null;
  const conformity = !f ? 'no limits set' : `${f.verdict ?? 'no verdict'} (${f.rule}${typeof f.probability === 'number' ? `, p_c = ${trimNumber(f.probability, 3)}` : ''})`;
  return h(
    'tr',
    { className: provisional ? 'provisional' : '', title: e.statement ?? '', dataset: { quantity: name, kind } },
    h('td', { className: 'quantity' }, kind === 'derived' ? h('span', { className: 'derived-mark', text: 'ƒ ', 'aria-hidden': 'true' }) : null, breakable(name)),
    h('td', { className: 'statement-cell' }, h('span', { dataset: { field: 'statement' }, text: formatResult(shown.value, shown.U, unitSuffix(unit)) }), typeB ? h('span', { className: 'basis', text: ' A + B', title: 'with the Type B components of its budget' }) : null),
    h('td', { text: trimNumber(shown.k, 3) }),
    // A combined ν_eff of null is infinite (every component of infinite degrees); a Type A one of null is unknown.
    h('td', { text: c && c.dof === null ? '∞' : trimNumber(shown.dof, 3) }),
    h('td', { text: count }),
    h('td', { dataset: { field: 'result' } }, provisional ? h('span', { className: 'provisional-word', text: `↗ provisional${reasons ? `: ${reasons}` : ''}` }) : h('span', { className: 'result-word', text: '✓ result' })),
    h('td', { dataset: { field: 'conformity' }, text: conformity }),
  );
}
