// One channel in depth: the numbers, the progress towards the target, the live trace with the mean
// and its uncertainty band and the warm-up cut, the autocorrelation function with tau_int and the
// summation window, the Allan deviation with the averaging limit, the CUSUM sums, the estimators
// side by side, the steady-state evidence and the channel's events. The numbers follow the live
// link; the charts reload every two seconds while the view is open.

import { h, setText, replaceChildren } from '../lib/dom.js';
import { api } from '../lib/api.js';
import { decimalsFor, formatValue, formatResult, formatCount, formatEffective, formatDuration, stateOf, trimNumber, unitSuffix, unitText, samplesProgress, coverageText, clockTime } from '../lib/format.js';
import { traceChart, acfChart, allanChart, cusumChart, convergenceChart } from '../lib/charts.js';
import { DetailView } from '../lib/detail-view.js';
import { ProgressBar } from '../lib/progress-bar.js';
import { showEvents } from '../lib/event-list.js';

export class ChannelView extends DetailView {
  constructor(root, app) {
    super(root, app, 'view-channel', 'Channel');
  }

  build(name) {
    const summary = this.app.state.channels.get(name);
    const unit = unitSuffix(summary?.unit);
    const f = (key, className = 'num') => h('span', { className, dataset: { field: key } });
    this.parts = {
      badge: h('span', { className: 'state-word', dataset: { field: 'state' } }),
      headline: h('p', { className: 'view-verdict', dataset: { field: 'verdict' } }),
      unitNote: h('p', { className: 'unit-note', dataset: { field: 'unitNote' } }),
      unit: h('span', { className: 'unit', dataset: { field: 'unit' }, text: unit }),
      result: f('result', 'result'),
      coverage: f('coverage', 'coverage'),
      last: f('last'),
      u: f('u'),
      k: f('k'),
      dof: f('dof'),
      n: f('n'),
      nEff: f('nEff'),
      tau: f('tau'),
      excluded: f('excluded'),
      estimator: f('estimator'),
      rate: f('rate'),
      progressText: f('progress', 'progress-text'),
      tauNote: h('p', { className: 'chart-note' }),
      allanNote: h('p', { className: 'chart-note' }),
      traceNote: h('p', { className: 'chart-note' }),
      convergenceNote: h('p', { className: 'chart-note', dataset: { field: 'convergence' } }),
      cusumNote: h('p', { className: 'chart-note' }),
      estimators: h('tbody'),
      budget: h('tbody'),
      budgetNote: h('p', { className: 'chart-note' }),
      verdict: h('ul', { className: 'verdict-list' }),
      estimatorReason: h('p', { className: 'chart-note' }),
      evidence: h('tbody'),
      notes: h('ul', { className: 'notes' }),
      events: h('ol', { className: 'channel-events' }),
      refusedNote: h('p', { className: 'intake-figure', dataset: { field: 'refused' } }),
      refused: h('tbody'),
      gapsNote: h('p', { className: 'intake-figure', dataset: { field: 'gaps' } }),
      gaps: h('tbody'),
      error: h('p', { className: 'error', role: 'alert' }),
      // Headings that carry the channel's unit (set when it is known).
      uHead: h('th', { text: inUnit('u', summary?.unit) }),
      contributionHead: h('th', { text: inUnit('contribution', summary?.unit) }),
    };
    const p = this.parts;
    this.progress = new ProgressBar('progress towards the target precision');
    const stat = (label, node, title) => h('div', { className: 'stat-card', title }, h('span', { className: 'label', text: label }), node);
    const traceBox = h('div', { className: 'chart', id: 'chart-trace' });
    const acfBox = h('div', { className: 'chart', id: 'chart-acf' });
    const allanBox = h('div', { className: 'chart', id: 'chart-allan' });
    const cusumBox = h('div', { className: 'chart', id: 'chart-cusum' });
    const convergenceBox = h('div', { className: 'chart', id: 'chart-convergence', hidden: true });
    this.convergenceBox = convergenceBox;
    replaceChildren(
      this.element,
      h('div', { className: 'view-head' }, h('a', { className: 'back', href: '#/', text: '← sheet' }), h('h1', { className: 'channel-title' }, h('span', { text: name }), p.unit), p.badge),
      p.error,
      p.headline,
      h('div', { className: 'result-row' }, h('div', { className: 'result-box' }, h('span', { className: 'label', text: 'mean ± U' }), p.result, p.coverage), h('div', { className: 'entry-progress wide' }, this.progress.element, p.progressText)),
      p.unitNote,
      h('div', { className: 'panel verdict-panel' }, h('h2', { text: 'Verdict' }), p.verdict),
      h(
        'div',
        { className: 'stat-grid' },
        stat('last value', p.last),
        stat('u (standard)', p.u, 'standard uncertainty of the mean'),
        stat('k', p.k, 'coverage factor from the t-distribution'),
        stat('ν_eff', p.dof, 'effective degrees of freedom'),
        stat('n', p.n, 'samples in the averaging window'),
        stat('n_eff', p.nEff, 'effective number of independent samples'),
        stat('τ_int', p.tau, 'integrated autocorrelation time, in samples'),
        stat('excluded', p.excluded, 'samples cut as warm-up or before a break'),
        stat('estimator', p.estimator),
        stat('rate', p.rate, 'samples per second'),
      ),
      h('div', { className: 'panel trace-panel' }, h('h2', { text: 'Samples, mean and ±U band' }), this.buildRangeBar(), traceBox, p.traceNote),
      h('div', { className: 'panel convergence-panel' }, h('h2', { text: 'Running mean ± U' }), convergenceBox, p.convergenceNote),
      // What did not reach the mean: samples refused for this channel and samples that never came.
      h(
        'div',
        { className: 'chart-row intake-row' },
        h('div', { className: 'panel intake-panel', id: 'channel-refused' }, h('h2', { text: 'Refused samples' }), p.refusedNote, h('table', { className: 'table' }, h('thead', {}, h('tr', {}, h('th', { text: 'reason' }), h('th', { className: 'count', text: 'samples' }))), p.refused)),
        h('div', { className: 'panel intake-panel', id: 'channel-gaps' }, h('h2', { text: 'Gaps (samples that never came)' }), p.gapsNote, h('div', { className: 'table-scroll gap-scroll' }, h('table', { className: 'table' }, h('thead', {}, h('tr', {}, ...['from', 'to', 'length', 'missing', 'found by'].map((t) => h('th', { text: t })))), p.gaps))),
      ),
      h(
        'div',
        { className: 'chart-row' },
        h('div', { className: 'panel' }, h('h2', { text: 'Autocorrelation' }), acfBox, p.tauNote),
        h('div', { className: 'panel' }, h('h2', { text: 'Allan deviation' }), allanBox, p.allanNote),
      ),
      h(
        'div',
        { className: 'chart-row' },
        h('div', { className: 'panel' }, h('h2', { text: 'CUSUM on block means' }), cusumBox, p.cusumNote),
        h('div', { className: 'panel' }, h('h2', { text: 'Events of this channel' }), p.events),
      ),
      h(
        'div',
        { className: 'chart-row' },
        h('div', { className: 'panel' }, h('h2', { text: 'Estimators of the uncertainty' }), p.estimatorReason, h('div', { className: 'table-scroll' }, h('table', { className: 'table' }, h('thead', {}, h('tr', {}, ...['estimator', 'τ_int (samples)', 'n_eff', p.uHead, 'ν_eff', 'window', 'reliable'].map((t) => (typeof t === 'string' ? h('th', { text: t }) : t)))), p.estimators))),
        h('div', { className: 'panel' }, h('h2', { text: 'Steady-state evidence' }), h('div', { className: 'table-scroll' }, h('table', { className: 'table' }, p.evidence)), p.notes),
      ),
      // the combined uncertainty with its budget and the conformity outcome (issue 10)
      h('div', { className: 'panel budget-panel' }, h('h2', { text: 'Uncertainty budget' }), p.budgetNote, h('table', { className: 'table' }, h('thead', {}, h('tr', {}, ...['quantity', 'source', 'type', 'u', 'distribution', 'sensitivity', p.contributionHead, 'ν', 'share'].map((t) => (typeof t === 'string' ? h('th', { text: t }) : t)))), p.budget)),
    );
    const clock = this.app.state.server?.sampleClock;
    this.trace = traceChart(traceBox, clock ? `${clock}, time of day (24 h)` : undefined, () => this.zoomed());
    this.convergence = convergenceChart(convergenceBox, clock ? `${clock}, time of day (24 h)` : undefined);
    this.charts = [this.trace, acfChart(acfBox), allanChart(allanBox), cusumChart(cusumBox), this.convergence];
    this.range = null;
    this.loadedCount = DEFAULT_TRACE;
    this.markRange();
    if (summary) this.updateSummary(summary);
  }

  /** Live numbers from the WebSocket summary. */
  updateSummary(s) {
    if (!this.name || s.name !== this.name) return;
    const p = this.parts;
    this.showConvergence(s);
    const state = stateOf(s.state);
    const unit = unitSuffix(s.unit);
    setText(p.unit, unit);
    p.badge.className = `state-word ${state.className}`;
    setText(p.badge, `${state.symbol} ${state.label}`);
    p.badge.title = state.hint;
    this.element.className = `view view-channel ${state.className}`;
    const verdict = s.verdict;
    setText(p.headline, verdict ? (verdict.ready ? 'Ready to record' : `Waiting: ${verdict.summary}`) : state.hint);
    p.headline.classList.toggle('ready', Boolean(verdict?.ready));
    setText(p.unitNote, s.unitNote ? `Unit: ${s.unitNote}.` : '');
    const decimals = decimalsFor(s.expandedUncertainty);
    setText(p.result, formatResult(s.mean, s.expandedUncertainty, unit));
    setText(p.coverage, s.coverageFactor === null ? 'no uncertainty yet' : coverageText(s.coverageFactor, s.confidence));
    setText(p.last, s.last ? `${formatValue(s.last.value, decimals)}${unit}` : '–');
    setText(p.u, s.standardUncertainty === null ? '–' : `${trimNumber(s.standardUncertainty, 2)}${unit}`);
    setText(p.k, trimNumber(s.coverageFactor, 3));
    setText(p.dof, trimNumber(s.dof, 3));
    setText(p.n, formatCount(s.n));
    setText(p.nEff, formatEffective(s.nEff));
    setText(p.tau, trimNumber(s.tauInt, 3));
    setText(p.excluded, formatCount(s.excluded));
    const target = s.target;
    const steady = s.state === 'steady' || s.state === 'precise';
    let fraction = null;
    let text = 'no target set';
    if (target) {
      const goal = `${target.on} ≤ ${target.bound === null ? '–' : trimNumber(target.bound, 2)}${unit}`;
      if (!steady) text = `target ${goal}: judged once the channel is steady (no time to target while it is ${state.label.toLowerCase()})`;
      else if (target.reached) {
        fraction = 1;
        text = `target met (${goal})`;
      } else {
        const progress = samplesProgress(s.n, target);
        fraction = progress?.fraction ?? null;
        text = progress ? `${progress.text} for ${goal}${target.secondsToTarget !== null && target.secondsToTarget !== undefined ? ` · ≈ ${formatDuration(target.secondsToTarget)} more at the current rate` : ''}` : `towards ${goal}${target.note ? ` · ${target.note}` : ''}`;
      }
    }
    this.progress.show(fraction, Boolean(target?.reached && steady));
    setText(p.progressText, text);
    if (verdict) replaceChildren(p.verdict, verdict.ready ? [h('li', { className: 'ready', text: 'Ready to record: steady, and at the target where one is set.' })] : verdict.pending.map((c) => h('li', {}, h('strong', { text: `${c.condition}: ` }), c.message)));
  }

  /** The running mean ± U from what this page has seen (lib/history.js), at most once a second. */
  showConvergence(s) {
    const now = Date.now();
    // At most once a second, and the last update of a burst is drawn when the second is over.
    clearTimeout(this.convergenceTimer);
    if (this.convergenceDrawnMs && now - this.convergenceDrawnMs < 1000) {
      this.convergenceTimer = setTimeout(() => {
        const latest = this.app.state.channels.get(s.name);
        if (this.name === s.name && latest) this.showConvergence(latest);
      }, 1000 - (now - this.convergenceDrawnMs));
      return;
    }
    this.convergenceDrawnMs = now;
    const points = this.app.history.run(s.name);
    // Nothing to draw before two points: the note alone says so.
    this.convergenceBox.hidden = points.length < 2;
    this.convergence.update(points, s.unit);
    const unit = unitSuffix(s.unit);
    const first = points[0];
    const last = points.at(-1);
    let text;
    if (points.length < 2) text = `Collected by this page from the live figures since it opened (${clockTime(this.app.history.runStartMs(s.name))}, this computer's clock): no mean with an uncertainty to draw yet.`;
    else {
      const moved = last.mean - first.mean;
      const shrink = first.U > 0 && last.U !== null ? last.U / first.U : null;
      text = `Collected by this page from the live figures: ${formatCount(points.length)} points from ${clockTime(first.time * 1000)} (sample time), n from ${formatCount(first.n)} to ${formatCount(last.n)}. The mean moved ${moved >= 0 ? '+' : '−'}${trimNumber(Math.abs(moved), 3)}${unit}${shrink !== null ? `; U went from ${trimNumber(first.U, 2)}${unit} to ${trimNumber(last.U, 2)}${unit} (× ${trimNumber(shrink, 2)})` : ''}. A restart of the window starts a new run; a reload of the page starts again.`;
    }
    setText(this.parts.convergenceNote, text);
  }

  /** The range buttons above the trace: each sets the span shown (and how many samples are loaded for it). */
  buildRangeBar() {
    this.rangeButtons = RANGES.map((r) =>
      h('button', { type: 'button', className: 'range-button', dataset: { range: r.key }, 'aria-pressed': 'false', title: r.hint, text: r.label, on: { click: () => this.setRange(r.key) } }),
    );
    this.rangeText = h('span', { className: 'range-text', dataset: { field: 'range' }, 'aria-live': 'polite' });
    return h('div', { className: 'range-bar', role: 'group', 'aria-label': 'time range of the trace' }, h('span', { className: 'label', text: 'show' }), this.rangeButtons, this.rangeText);
  }

  setRange(key) {
    const spec = RANGES.find((r) => r.key === key);
    this.range = spec?.range ?? null;
    this.trace.setRange(this.range);
    this.markRange();
    this.refresh();
  }

  /** A drag across the trace zoomed it: the zoom holds over the reloads until a button is pressed. */
  zoomed() {
    this.range = { kind: 'zoom' };
    this.markRange();
  }

  markRange() {
    const key = this.range === null ? 'all' : this.range.kind === 'zoom' ? null : RANGES.find((r) => r.range && r.range.kind === this.range.kind && r.range.seconds === this.range.seconds)?.key;
    for (const button of this.rangeButtons) button.setAttribute('aria-pressed', String(button.dataset.range === key));
    this.describeRange();
  }

  /** Says the span on screen once the chart has drawn it (uPlot settles its scales after the call that changes them). */
  describeRange() {
    if (this.describing) return;
    this.describing = true;
    requestAnimationFrame(() => {
      this.describing = false;
      this.describeNow();
    });
  }

  describeNow() {
    const shown = this.trace?.shown();
    if (!shown || !Number.isFinite(shown.min) || !Number.isFinite(shown.max)) {
      setText(this.rangeText, '');
      return;
    }
    const what = this.range?.kind === 'zoom' ? 'zoomed to' : 'showing';
    const span = shown.timed ? `${clockTime(shown.min * 1000)} – ${clockTime(shown.max * 1000)} (${formatDuration(shown.max - shown.min)})` : `samples ${formatCount(shown.min)} – ${formatCount(shown.max)}`;
    setText(this.rangeText, `${what} ${span}${this.range?.kind === 'zoom' ? ' · “all loaded” resets' : ' · drag across the chart to zoom'}`);
  }

  /** How many samples to load for the range shown (the API gives at most MAX_TRACE). */
  traceCount() {
    const d = this.lastDetail;
    const r = this.range;
    if (!r || !d) return DEFAULT_TRACE;
    if (r.kind === 'zoom') return this.loadedCount;
    const n = d.n ?? 0;
    const wanted = r.kind === 'last' ? (d.rate > 0 ? Math.ceil(d.rate * r.seconds * 1.05) + 10 : DEFAULT_TRACE) : r.kind === 'origin' ? n + (d.excluded ?? 0) + 10 : n + 10;
    return Math.max(DEFAULT_TRACE, Math.min(MAX_TRACE, wanted));
  }

  load(name) {
    this.loadedCount = this.traceCount();
    return api.channel(name, this.loadedCount);
  }

  render(d) {
    const p = this.parts;
    this.lastDetail = d;
    setText(p.uHead, inUnit('u', d.unit));
    setText(p.contributionHead, inUnit('contribution', d.unit));
    for (const chart of this.charts) if (chart !== this.convergence) chart.update(d);
    this.describeRange();
    setText(p.estimator, d.estimator);
    setText(p.estimatorReason, d.estimatorReason ? `Used: ${d.estimator}, ${d.estimatorReason}.` : '');
    setText(p.rate, d.rate === null ? '–' : `${trimNumber(d.rate, 3)} /s`);
    const used = d.estimators?.[d.estimator];
    const windowText = !used ? '' : d.estimator === 'ar' ? `, an autoregression of order ${used.window}` : ['geyer', 'sokal'].includes(d.estimator) ? `, summed over lags 1…${used.window}` : `, batches of ${used.window}`;
    setText(p.tauNote, d.tauInt === null ? 'No autocorrelation yet (too few samples).' : `τ_int = ${trimNumber(d.tauInt, 3)} samples by ${d.estimator}${windowText}; n_eff = n / τ_int = ${formatEffective(d.nEff)}.`);
    setText(p.allanNote, d.averagingLimit ? `Averaging limit at m = ${d.averagingLimit.m}${d.averagingLimit.tauSeconds ? ` (${formatDuration(d.averagingLimit.tauSeconds)})` : ''}: beyond it drift dominates and longer averaging does not help.` : 'No averaging limit in this window: the Allan deviation still falls with averaging time.');
    const trace = d.trace;
    const before = trace.windowStartIndex - trace.firstIndex;
    const clock = this.app.state.server?.sampleClock;
    setText(p.traceNote, `${formatCount(trace.values.length)} most recent samples${before > 0 ? `; the first ${formatCount(before)} (shaded) are outside the averaging window` : ''}. ${trace.gaps?.length ? ` ${formatCount(trace.gaps.length)} ${trace.gaps.length === 1 ? 'gap' : 'gaps'} in this trace (hatched).` : ''} Band: mean ± U over the window. Times: ${clock ? `${clock}, ` : ''}time of day, 24 h, this browser's time zone.`);
    setText(p.cusumNote, d.cusumTrace ? `${d.cusumTrace.alarmed ? 'The sums as they stood at the alarm (the monitor starts again once the channel is steady). ' : ''}Blocks of ${d.cusumTrace.blockSize} samples; a sum crossing h = ${trimNumber(d.cusumTrace.decisionInterval, 3)} signals a shift.` : 'The CUSUM runs once the channel is steady.');
    replaceChildren(
      p.estimators,
      Object.entries(d.estimators ?? {}).map(([name, e]) =>
        h('tr', { className: name === d.estimator ? 'used' : '' }, h('td', { text: name === d.estimator ? `${name} (used)` : name }), h('td', { text: trimNumber(e.tauInt, 3) }), h('td', { text: formatEffective(e.nEff) }), h('td', { text: trimNumber(e.standardUncertainty, 2) }), h('td', { text: trimNumber(e.dof, 3) }), h('td', { text: String(e.window) }), h('td', { text: e.reliable ? 'yes' : 'no', title: e.note ?? '' })),
      ),
    );
    renderBudget(p, d);
    renderIntake(p, d, this.app.state.server?.sampleClock);
    const t = d.stationarity?.tests;
    const rows = [
      ['steady from sample', d.stationarity?.warmupEnd ?? 'not steady'],
      ['warm-up found by', d.stationarity?.warmupMethod ?? '–'],
      ['warm-up fit', d.stationarity?.transient ? `time constant ${trimNumber(d.stationarity.transient.timeConstant, 3)} samples, amplitude ${trimNumber(d.stationarity.transient.amplitude, 3)}${d.stationarity.transient.significant ? '' : ' (not significant)'}` : '–'],
      ['periodic components', d.spectrum?.lines?.length ? d.spectrum.lines.map((l) => `period ${trimNumber(l.period, 3)} samples, amplitude ${trimNumber(l.amplitude, 3)}`).join('; ') : 'none'],
      ['long memory', d.spectrum?.longMemory ? `H = ${trimNumber(d.spectrum.longMemory.hurst, 3)}${d.spectrum.longMemory.detected ? ' (long memory)' : ' (short memory)'}` : '–'],
      ['resolution', d.resolution ? `lattice of step ${trimNumber(d.resolution.step, 3)} (${d.resolution.distinct} values)` : 'none found'],
      ['Heidelberger-Welch', t?.heidelbergerWelch ? `${t.heidelbergerWelch.passed ? 'passed' : 'failed'} (p = ${trimNumber(t.heidelbergerWelch.pValue, 3)})` : '–'],
      ['Geweke z', t?.geweke ? trimNumber(t.geweke.statistic, 3) : '–'],
      ['KPSS (block means)', t?.kpss ? `${trimNumber(t.kpss.statistic, 3)} (${t.kpss.passed ? 'not rejected' : 'rejected'} at 5 %)` : '–'],
      ['MSER truncation', t?.mser ? `${t.mser.truncation} samples` : '–'],
      ['Cao-Rhinehart ratio', t?.caoRhinehart?.statistic !== null && t?.caoRhinehart ? `${trimNumber(t.caoRhinehart.statistic, 3)} (critical ${trimNumber(t.caoRhinehart.critical, 3)})` : '–'],
      ['last break', d.stationarity?.lastBreak ? `${d.stationarity.lastBreak.cause} at sample ${d.stationarity.lastBreak.changePoint}` : 'none'],
    ];
    replaceChildren(p.evidence, rows.map(([k, v]) => h('tr', {}, h('th', { text: k }), h('td', { text: String(v) }))));
    replaceChildren(p.notes, (d.notes ?? []).map((note) => h('li', { text: note })));
    showEvents(p.events, d.storedEvents ?? [], 'No events yet.', d.unit ?? null);
  }
}

const DEFAULT_TRACE = 2000;
const MAX_TRACE = 20000;

/** The ranges of the trace: the newest minute, ten minutes, since the test point's start, the averaging window, every sample loaded. */
const RANGES = [
  { key: 'last-1', label: 'last 1 min', hint: 'the newest minute of samples', range: { kind: 'last', seconds: 60 } },
  { key: 'last-10', label: 'last 10 min', hint: 'the newest ten minutes of samples', range: { kind: 'last', seconds: 600 } },
  { key: 'origin', label: 'since test point start', hint: 'from the start of the current window run (the test point, or the daemon) with the warm-up', range: { kind: 'origin' } },
  { key: 'window', label: 'averaging window', hint: 'the samples in the mean now', range: { kind: 'window' } },
  { key: 'all', label: 'all loaded', hint: 'every sample loaded (the newest 2 000 or more); resets a zoom', range: null },
];

/** A column heading with the unit of its numbers: "u (°C)"; the heading alone without a unit. */
function inUnit(heading, unitCode) {
  const text = unitText(unitCode);
  return text ? `${heading} (${text})` : heading;
}

/** Refused samples by reason and gaps, since the daemon started (the API's intake). */
function renderIntake(p, d, clock) {
  const intake = d.intake;
  if (!intake) {
    setText(p.refusedNote, 'This daemon does not report its intake per channel.');
    setText(p.gapsNote, '');
    replaceChildren(p.refused, []);
    replaceChildren(p.gaps, []);
    p.refused.parentElement.hidden = true;
    p.gaps.closest('.table-scroll').hidden = true;
    return;
  }
  const reasons = Object.entries(intake.refused.byReason).filter(([, count]) => count > 0).sort((a, b) => b[1] - a[1] || a[0].localeCompare(b[0]));
  setText(p.refusedNote, intake.refused.total === 0 ? 'None refused since the daemon started.' : `${formatCount(intake.refused.total)} ${intake.refused.total === 1 ? 'sample' : 'samples'} refused since the daemon started; none of them is in the mean.`);
  // An empty table is not drawn: the line above says there is nothing.
  p.refused.parentElement.hidden = reasons.length === 0;
  replaceChildren(p.refused, reasons.map(([reason, count]) => h('tr', { dataset: { reason } }, h('td', { text: reason, title: REFUSAL_TEXT[reason] ?? '' }), h('td', { className: 'count', text: formatCount(count) }))));
  const g = intake.gaps;
  const interval = g.intervalMs === null ? 'expected interval not known yet' : `expected interval ${formatMs(g.intervalMs)}${g.learned ? ' (learned from the time stamps)' : ' (configured)'}`;
  setText(p.gapsNote, g.count === 0 ? `No gap since the daemon started; ${interval}.` : `${formatCount(g.count)} ${g.count === 1 ? 'gap' : 'gaps'}, ${formatCount(g.missingSamples)} ${g.missingSamples === 1 ? 'sample' : 'samples'} missing since the daemon started; ${interval}. Gaps in the trace above are hatched.${g.recent.length < g.count ? ` The newest ${g.recent.length} are listed.` : ''}`);
  p.gaps.closest('.table-scroll').hidden = g.recent.length === 0;
  replaceChildren(
    p.gaps,
    g.recent
      .slice()
      .reverse()
      .map((gap) => {
        const from = Date.parse(gap.from);
        const to = Date.parse(gap.to);
        return h('tr', {}, h('td', { className: 'time', text: clockTime(from) }), h('td', { className: 'time', text: clockTime(to) }), h('td', { text: formatMs(to - from) }), h('td', { text: `${formatCount(gap.missing)} ${gap.source === 'sequence' ? (gap.missing === 1 ? 'message' : 'messages') : gap.missing === 1 ? 'sample' : 'samples'}` }), h('td', { text: gap.source === 'sequence' ? 'sequence numbers' : 'time stamps' }));
      }),
  );
  p.gapsNote.title = clock ? `times: ${clock}` : '';
}

/** A span of milliseconds in words: "250 ms", "1.5 s", "3 min 20 s". */
function formatMs(ms) {
  if (!Number.isFinite(ms)) return '–';
  return ms < 1000 ? `${trimNumber(ms, 3)} ms` : ms < 60_000 ? `${trimNumber(ms / 1000, 3)} s` : formatDuration(ms / 1000);
}

/** What each refusal reason means, for the row's tooltip (the README lists them). */
const REFUSAL_TEXT = {
  'not-a-number': 'the value was not a number',
  nan: 'the value was NaN',
  infinite: 'the value was infinite',
  'out-of-range': 'the value was beyond any physical magnitude',
  'bad-time': 'the time stamp was not a time',
  'missing-field': 'the value field was missing',
  'wrong-type': 'a record of the wrong type',
  duplicate: 'a second sample at a time already accepted',
  'out-of-order': 'older than every time the channel remembers',
  redelivered: 'stored before a restart and delivered again',
  'engine-error': 'the engine failed on it (logged)',
};

/** The budget panel: one row per component (covariance lines included), u_c, ν_eff, k, U, stopping rule and conformity. */
function renderBudget(p, d) {
  const c = d.combined;
  if (!c) {
    setText(p.budgetNote, 'No combined uncertainty yet (too few samples).');
    replaceChildren(p.budget, []);
    return;
  }
  const f = d.conformity;
  const stop = c.stopping;
  const unit = unitSuffix(d.unit);
  const parts = [`u_c = ${trimNumber(c.standardUncertainty, 2)}${unit}, ν_eff = ${c.dof === null ? '∞' : trimNumber(c.dof, 3)}, k = ${trimNumber(c.coverageFactor, 3)}, U = ${trimNumber(c.expandedUncertainty, 2)}${unit}`];
  if (stop) parts.push(stop.stop ? `stopping rule met (${stop.reason === 'dominance' ? `u_A ≤ ${stop.fraction} u_c` : stop.target?.basis === 'type-a' ? 'Type A target' : 'combined target'})` : `stopping rule: waiting for ${stop.waitingFor === 'dominance' ? `u_A ≤ ${stop.fraction} u_c` : stop.waitingFor === 'target' ? (stop.target?.basis === 'type-a' ? 'the Type A target' : 'the combined target') : 'nothing it can reach'}`);
  if (f) parts.push(`conformity (${f.rule}): ${f.verdict ?? 'no verdict'}${typeof f.probability === 'number' ? `, p_c = ${trimNumber(f.probability, 3)}` : ''}`);
  setText(p.budgetNote, `${parts.join('; ')}.`);
  replaceChildren(
    p.budget,
    c.budget.map((b) =>
      h(
        'tr',
        { className: b.evaluation === 'covariance' ? 'covariance' : '' },
        h('td', { text: b.quantity }),
        h('td', { text: `${b.component}${b.proposed ? ' (proposed)' : ''}`, title: b.basis ?? '' }),
        h('td', { text: b.evaluation === 'covariance' ? '–' : b.evaluation }),
        // u in its quantity's unit: the channel's own where the quantity is the channel.
        h('td', { text: b.standardUncertainty === null ? '–' : `${trimNumber(b.standardUncertainty, 2)}${b.quantity === d.name ? unit : ''}` }),
        h('td', { text: b.distribution }),
        h('td', { text: b.sensitivity === null ? '–' : trimNumber(b.sensitivity, 3) }),
        h('td', { text: trimNumber(b.contribution, 2) }),
        h('td', { text: b.dof === null ? '∞' : trimNumber(b.dof, 3) }),
        h('td', { text: b.share === null ? '–' : `${trimNumber(b.share * 100, 3)} %` }),
      ),
    ),
  );
}
