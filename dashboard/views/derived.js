// One derived result in depth: value ± U with k and the coverage probability, the interval as if
// its inputs were uncorrelated, the progress to the target, the statement, the uncertainty budget
// as a chart (each input's variance term and each covariance term as a share of u_c²; negative
// covariance terms drawn left of zero), the inputs with their means, sensitivities and shares, the
// covariance terms, the correlation with the other derived results, and its events. The numbers
// follow the live link; the events reload every two seconds while the view is open.

import { h, setText, replaceChildren, breakable } from '../lib/dom.js';
import { api } from '../lib/api.js';
import { formatResult, formatUncertainty, formatCount, formatEffective, formatDuration, percent, stateOf, trimNumber, derivedStateOf, signedPercent, unitSuffix, unitText, coverageText } from '../lib/format.js';
import { budgetChart } from '../lib/budget-chart.js';
import { DetailView } from '../lib/detail-view.js';
import { ProgressBar } from '../lib/progress-bar.js';
import { showEvents } from '../lib/event-list.js';

export class DerivedView extends DetailView {
  constructor(root, app) {
    super(root, app, 'view-derived', 'Derived result');
  }

  build(name) {
    const f = (key, className = 'num') => h('span', { className, dataset: { field: key } });
    this.parts = {
      badge: h('span', { className: 'state-word', dataset: { field: 'state' } }),
      unit: h('span', { className: 'unit', dataset: { field: 'unit' } }),
      result: f('result', 'result'),
      coverage: f('coverage', 'coverage'),
      independent: f('independent', 'result secondary'),
      independentNote: f('independent-note', 'coverage'),
      statement: h('p', { className: 'statement', dataset: { field: 'statement' } }),
      u: f('u'),
      k: f('k'),
      dof: f('dof'),
      rows: f('rows'),
      bucket: f('bucket'),
      batches: f('batches'),
      ess: f('ess'),
      estimator: f('estimator'),
      window: f('window'),
      progressText: f('progress', 'progress-text'),
      budgetNote: h('p', { className: 'chart-note', dataset: { field: 'budget-note' } }),
      inputs: h('tbody', { id: 'derived-inputs' }),
      covariance: h('tbody', { id: 'derived-covariance' }),
      correlation: h('div', { id: 'derived-correlation' }),
      waiting: h('ul', { className: 'notes', dataset: { field: 'waiting' } }),
      notes: h('ul', { className: 'notes' }),
      events: h('ol', { className: 'channel-events', id: 'derived-events' }),
      expression: h('code', { className: 'expression', dataset: { field: 'expression' } }),
      error: h('p', { className: 'error', role: 'alert' }),
    };
    const p = this.parts;
    this.progress = new ProgressBar('progress towards the target uncertainty');
    const stat = (label, node, title) => h('div', { className: 'stat-card', title }, h('span', { className: 'label', text: label }), node);
    const budgetBox = h('div', { className: 'chart budget-chart', id: 'derived-budget' });
    const table = (headings, body) => h('table', { className: 'table' }, h('thead', {}, h('tr', {}, ...headings.map((t) => h('th', { text: t })))), body);
    replaceChildren(
      this.element,
      h('div', { className: 'view-head' }, h('a', { className: 'back', href: '#/', text: '← sheet' }), h('h1', { className: 'channel-title' }, h('span', { className: 'derived-mark', text: 'ƒ ', 'aria-hidden': 'true' }), h('span', {}, breakable(name)), p.unit), p.badge),
      p.error,
      h(
        'div',
        { className: 'result-row' },
        h('div', { className: 'result-box' }, h('span', { className: 'label', text: 'value ± U' }), p.result, p.coverage),
        h('div', { className: 'result-box', title: 'the same result computed as if the input channels were uncorrelated (diagonal covariance, Welch-Satterthwaite degrees of freedom)' }, h('span', { className: 'label', text: 'U as if the inputs were uncorrelated' }), p.independent, p.independentNote),
        h('div', { className: 'tile-progress wide' }, this.progress.element, p.progressText),
      ),
      p.statement,
      h(
        'div',
        { className: 'stat-grid' },
        stat('u_c (standard)', p.u, 'combined standard uncertainty, with the covariance of the input means'),
        stat('k', p.k, 'coverage factor from the t-distribution'),
        stat('ν_eff', p.dof, 'degrees of freedom of u_c'),
        stat('rows', p.rows, 'common time buckets of the input channels'),
        stat('bucket', p.bucket, 'width of a common time bucket'),
        stat('batches', p.batches, 'batches × rows per batch of the multivariate batch means'),
        stat('mESS', p.ess, 'multivariate effective sample size of the inputs, in rows'),
        stat('covariance', p.estimator, 'estimator of the covariance of the input means'),
        stat('window', p.window, 'span of the common window of the inputs'),
      ),
      h('div', { className: 'panel' }, h('h2', { text: 'Uncertainty budget: each term of u_c²' }), budgetBox, p.budgetNote),
      h('div', { className: 'panel' }, h('h2', { text: 'Inputs: means, sensitivities and shares of u_c²' }), h('div', { className: 'table-scroll' }, table(['input', 'state', 'mean x_i', 'u(x_i)', 'sensitivity c_i', 'c_i·u(x_i)', 'c_i²·u²(x_i) / u_c²', 'share with covariance'], p.inputs))),
      h('div', { className: 'panel' }, h('h2', { text: 'Covariance of the input means' }), h('div', { className: 'table-scroll' }, table(['pair of inputs', 'correlation r of the means', 'term 2·c_i·c_j·u(x_i, x_j)', 'share of u_c²'], p.covariance))),
      h(
        'div',
        { className: 'chart-row' },
        h('div', { className: 'panel' }, h('h2', { text: 'Correlation with the other derived results' }), p.correlation, h('h2', { className: 'spaced', text: 'Model' }), p.expression, p.waiting, p.notes),
        h('div', { className: 'panel' }, h('h2', { text: 'Events of this result' }), p.events),
      ),
    );
    this.charts = [budgetChart(budgetBox)];
    const live = this.app.state.derived.get(name);
    if (live) this.update(live);
  }

  /** Live numbers from the WebSocket (or the HTTP detail). */
  update(d) {
    if (!this.name || d.name !== this.name) return;
    const p = this.parts;
    const state = derivedStateOf(d);
    p.badge.className = `state-word ${state.className}`;
    this.element.className = `view view-derived ${state.className}`;
    setText(p.badge, `${state.symbol} ${state.label}`);
    p.badge.title = state.hint;
    const unit = unitSuffix(d.unit);
    setText(p.unit, unit);
    setText(p.result, formatResult(d.value, d.expandedUncertainty, unit));
    setText(p.coverage, d.coverageFactor === null ? 'no uncertainty yet' : coverageText(d.coverageFactor, d.confidence));
    const ind = d.independent;
    setText(p.independent, ind?.expandedUncertainty === null || ind?.expandedUncertainty === undefined ? '–' : `± ${formatUncertainty(ind.expandedUncertainty)}${unit}`);
    setText(p.independentNote, ind ? `k = ${trimNumber(ind.coverageFactor, 3)}, ν = ${trimNumber(ind.dof, 3)}${d.expandedUncertainty > 0 && ind.expandedUncertainty > 0 ? ` · ${trimNumber(ind.expandedUncertainty / d.expandedUncertainty, 3)} × the correlated U` : ''}` : '');
    setText(p.statement, d.statement ?? '');
    setText(p.u, d.standardUncertainty === null ? '–' : `${trimNumber(d.standardUncertainty, 2)}${unit}`);
    setText(p.k, trimNumber(d.coverageFactor, 3));
    setText(p.dof, d.dof === null ? '–' : `${trimNumber(d.dof, 3)}${d.dofMethod === 'batches' ? ' (batches − 1)' : d.dofMethod === 'observations' ? ' (rows − 1)' : ''}`);
    setText(p.rows, formatCount(d.rows));
    setText(p.bucket, d.bucketSeconds === null ? '–' : `${trimNumber(d.bucketSeconds, 3)} s`);
    setText(p.batches, d.batches === null ? '–' : `${d.batches} × ${d.batchSize ?? '–'}`);
    setText(p.ess, formatEffective(d.multivariateEss));
    setText(p.estimator, d.estimator);
    setText(p.window, d.window ? formatDuration(d.window.endSeconds - d.window.startSeconds) : '–');
    setText(p.expression, d.expression);
    this.updateProgress(d, unit);
    for (const chart of this.charts) chart.update(d);
    setText(p.budgetNote, budgetNote(d));
    this.fillInputs(d);
    this.fillCorrelation(d);
    replaceChildren(p.waiting, (d.waitingFor ?? []).map((w) => h('li', { text: `waiting: ${w}` })));
    replaceChildren(p.notes, (d.notes ?? []).map((note) => h('li', { text: note })));
  }

  updateProgress(d, unit) {
    const p = this.parts;
    const target = d.target;
    let fraction = null;
    let text = 'no target set';
    const inputsSteady = Object.values(d.inputStates ?? {}).every((s) => s === 'steady' || s === 'precise');
    if (target?.reached) {
      fraction = d.atTarget ? 1 : null;
      text = `${d.atTarget ? 'target met' : 'uncertainty within the target, waiting for the inputs'} (${target.on} ≤ ${trimNumber(target.bound, 2)}${unit})`;
    } else if (target) {
      const goal = `${target.on} ≤ ${target.bound === null ? '–' : trimNumber(target.bound, 2)}${unit}${target.relative ? ` (${trimNumber(target.value * 100, 3)} % of the value)` : ''}`;
      if (!inputsSteady) text = `target ${goal}: judged once every input is steady`;
      else if (target.samplesNeeded > 0) {
        fraction = Math.max(0, Math.min(1, d.rows / target.samplesNeeded));
        text = `${formatCount(d.rows)} of ${formatCount(target.samplesNeeded)} rows needed for ${goal}${target.secondsToTarget !== null && target.secondsToTarget !== undefined ? ` · ≈ ${formatDuration(target.secondsToTarget)} more at the current rate` : ''}`;
      } else text = `towards ${goal}${target.note ? ` · ${target.note}` : ''}`;
    }
    this.progress.show(fraction, target?.reached);
    setText(p.progressText, text);
  }

  fillInputs(d) {
    const p = this.parts;
    const u2 = d.standardUncertainty > 0 ? d.standardUncertainty ** 2 : null;
    replaceChildren(
      p.inputs,
      (d.budget ?? []).map((b) => {
        const s = stateOf(d.inputStates?.[b.channel] ?? 'no data');
        // Units as people write them: the input's on its mean and u, the result's on c_i·u(x_i),
        // their ratio on the sensitivity.
        const inputUnit = unitText(this.app.state.channels.get(b.channel)?.unit);
        const resultUnit = unitText(d.unit);
        const perUnit = resultUnit || inputUnit ? ` ${resultUnit || '1'}/${inputUnit || '1'}` : '';
        return h(
          'tr',
          { dataset: { input: b.channel } },
          h('td', {}, h('a', { href: `#/channel/${encodeURIComponent(b.channel)}`, text: b.channel })),
          h('td', { className: s.className }, h('span', { className: 'state-word', text: `${s.symbol} ${s.label.toLowerCase()}` })),
          h('td', { text: `${trimNumber(b.mean, 7)}${inputUnit ? ` ${inputUnit}` : ''}` }),
          h('td', { text: `${trimNumber(b.standardUncertainty, 3)}${inputUnit ? ` ${inputUnit}` : ''}` }),
          h('td', { text: `${trimNumber(b.sensitivity, 4)}${perUnit}` }),
          h('td', { text: `${trimNumber(b.contribution, 3)}${resultUnit ? ` ${resultUnit}` : ''}` }),
          h('td', { text: signedPercent(b.varianceShare) }),
          h('td', { text: signedPercent(b.share) }),
        );
      }),
    );
    replaceChildren(
      p.covariance,
      (d.covarianceTerms ?? []).length === 0
        ? h('tr', {}, h('td', { className: 'muted', colspan: '4', text: 'One input: no covariance terms.' }))
        : d.covarianceTerms.map((c) =>
            h('tr', { className: c.term < 0 ? 'negative' : '' }, h('td', { text: `${c.channels[0]} × ${c.channels[1]}` }), h('td', { text: trimNumber(c.correlation, 3) }), h('td', { text: trimNumber(c.term, 3) }), h('td', { text: u2 === null ? '–' : signedPercent(c.term / u2) })),
          ),
    );
  }

  fillCorrelation(d) {
    const others = [...this.app.state.derived.keys()].filter((n) => n !== d.name);
    const entries = Object.entries(d.correlation ?? {});
    if (entries.length > 0) {
      replaceChildren(
        this.parts.correlation,
        h('table', { className: 'table' }, h('thead', {}, h('tr', {}, h('th', { text: 'derived result' }), h('th', { text: 'r' }))), h('tbody', {}, entries.map(([name, r]) => h('tr', {}, h('td', {}, h('a', { href: `#/derived/${encodeURIComponent(name)}`, text: name })), h('td', { text: trimNumber(r, 3) }))))),
      );
    } else {
      replaceChildren(
        this.parts.correlation,
        h('p', { className: 'muted small', text: others.length === 0 ? 'No other derived result is configured.' : `Not computed live for ${others.join(', ')}: the correlations between derived results are computed over their common window when a test point records them (see its record and report).` }),
      );
    }
  }

  load(name) {
    return api.derived(name);
  }

  /** The HTTP detail: the numbers when the live link has none for this result, and the events. */
  render(detail) {
    if (!this.app.state.derived.has(this.name)) this.update(detail);
    showEvents(this.parts.events, detail.storedEvents ?? [], 'No events yet (an event is raised when the result reaches its target with steady inputs).');
  }
}

/** What the budget says, in words: the largest term and what the covariance terms do. */
function budgetNote(d) {
  if (!(d.standardUncertainty > 0) || d.covarianceShare === null) return '';
  const unit = unitSuffix(d.unit);
  const largest = [...(d.budget ?? [])].filter((b) => b.varianceShare !== null).sort((a, b) => b.varianceShare - a.varianceShare)[0];
  const parts = [];
  if (largest) parts.push(`Largest variance term: ${largest.channel} (${signedPercent(largest.varianceShare)} of u_c²).`);
  if (Math.abs(d.covarianceShare) < 0.01) parts.push(`The covariance terms are negligible (${signedPercent(d.covarianceShare)}).`);
  else if (d.covarianceShare < 0) parts.push(`The covariance terms sum to ${signedPercent(d.covarianceShare)} of u_c²: correlated inputs partly cancel, so u_c is smaller than the variance terms alone would give.`);
  else parts.push(`The covariance terms add ${signedPercent(d.covarianceShare)} of u_c²: correlated inputs reinforce each other.`);
  if (d.independent) parts.push(`As if uncorrelated, u_c would be ${trimNumber(d.independent.standardUncertainty, 3)}${unit} instead of ${trimNumber(d.standardUncertainty, 3)}${unit}.`);
  return parts.join(' ');
}
