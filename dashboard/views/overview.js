// The sheet: one entry per derived result and per channel, read like a measurement record. Each
// entry leads with its verdict (the state's glyph and name, then "ready to record" or what it
// waits for) and its statement "mean ± U unit (k = …, ≈95 %)"; the last value, n, n_eff and
// τ_int are secondary; the progress towards a target is the samples taken against the samples
// needed, shown only while the channel is steady. Entries are built once and updated in place;
// each part of an entry is filled by a function of its own, so a new strip (a Type B budget, a
// stability rule) is one more function.

import { h, setText, breakable } from '../lib/dom.js';
import { ProgressBar } from '../lib/progress-bar.js';
import { renderRuleStrip } from '../lib/rule-strip.js';
import { TrendLine } from '../lib/trend-line.js';
import { decimalsFor, formatValue, formatUncertainty, formatResult, formatCount, formatEffective, formatDuration, stateOf, trimNumber, derivedStateOf, unitText, unitSuffix, samplesProgress, coverageText, STATES } from '../lib/format.js';

const STEADY = new Set(['steady', 'precise']);

export class OverviewView {
  constructor(root, app) {
    this.app = app;
    this.entries = new Map();
    this.sheet = h('div', { className: 'sheet', id: 'sheet', role: 'list' });
    this.empty = h('p', { className: 'empty', text: 'Waiting for the first samples… (channels appear as soon as the daemon receives data)' });
    this.summary = h('p', { className: 'sheet-summary', 'aria-live': 'polite' });
    this.derivedEntries = new Map();
    this.derivedSheet = h('div', { className: 'sheet derived-sheet', id: 'derived-sheet', role: 'list' });
    this.derivedBlock = h(
      'section',
      { className: 'sheet-block', hidden: true, 'aria-label': 'Derived results' },
      h('div', { className: 'view-head' }, h('h1', { text: 'Derived results' }), h('p', { className: 'sheet-summary', text: 'computed from several channels, with the covariance of their means' })),
      this.derivedSheet,
    );
    this.element = h(
      'section',
      { className: 'view view-overview', 'aria-label': 'All channels' },
      this.derivedBlock,
      h('section', { className: 'sheet-block', 'aria-label': 'Channels' }, h('div', { className: 'view-head' }, h('h1', { text: 'Channels' }), this.summary), legend(), this.empty, this.sheet),
    );
    root.appendChild(this.element);
  }

  show(visible) {
    this.element.hidden = !visible;
  }

  /** Updates the given channels (all when names is omitted). */
  update(names) {
    const channels = this.app.state.channels;
    let added = false;
    for (const name of names ?? [...channels.keys()]) {
      const summary = channels.get(name);
      if (!summary) continue;
      let entry = this.entries.get(name);
      if (!entry) {
        entry = channelEntry(name);
        this.entries.set(name, entry);
        added = true;
      }
      fillChannel(entry, summary);
      entry.parts.trend.show(this.app.history.trend(name), summary.unit, decimalsFor(summary.expandedUncertainty));
    }
    if (added) for (const name of [...this.entries.keys()].sort((a, b) => a.localeCompare(b))) this.sheet.appendChild(this.entries.get(name).element);
    this.empty.hidden = this.entries.size > 0;
    this.updateSummary();
  }

  updateSummary() {
    const counts = {};
    for (const summary of this.app.state.channels.values()) counts[summary.state] = (counts[summary.state] ?? 0) + 1;
    const parts = Object.keys(STATES).filter((s) => counts[s]).map((s) => `${STATES[s].symbol} ${counts[s]} ${STATES[s].label.toLowerCase()}`);
    setText(this.summary, parts.join('   '));
  }

  /** Updates the given derived results (all when names is omitted). */
  updateDerived(names) {
    const derived = this.app.state.derived;
    let added = false;
    for (const name of names ?? [...derived.keys()]) {
      const d = derived.get(name);
      if (!d) continue;
      let entry = this.derivedEntries.get(name);
      if (!entry) {
        entry = derivedEntry(name);
        this.derivedEntries.set(name, entry);
        added = true;
      }
      fillDerived(entry, d);
    }
    for (const [name, entry] of this.derivedEntries) {
      if (derived.has(name)) continue;
      entry.element.remove();
      this.derivedEntries.delete(name);
    }
    if (added) for (const name of [...this.derivedEntries.keys()].sort((a, b) => a.localeCompare(b))) this.derivedSheet.appendChild(this.derivedEntries.get(name).element);
    this.derivedBlock.hidden = this.derivedEntries.size === 0;
  }
}

/** The key to the glyphs, always on the page: the sheet reads without colour. */
function legend() {
  return h(
    'p',
    { className: 'glyph-key', 'aria-label': 'Key to the state glyphs' },
    ...Object.values(STATES).map((s) => h('span', { className: `glyph-key-item ${s.className}`, title: s.hint }, h('span', { className: 'glyph', text: s.symbol, 'aria-hidden': 'true' }), ` ${s.label.toLowerCase()}`)),
  );
}

const field = (key, className) => h('span', { className, dataset: { field: key } });

// ---- a channel's entry ----------------------------------------------------------------------

function channelEntry(name) {
  const parts = {
    glyph: h('span', { className: 'entry-glyph', 'aria-hidden': 'true' }),
    state: field('state', 'state-word'),
    verdict: field('verdict', 'entry-verdict'),
    mean: field('mean', 'statement-value'),
    coverage: field('coverage', 'statement-coverage'),
    meanLabel: h('span', { className: 'label', text: 'mean ± U' }),
    last: field('last', 'num'),
    unit: field('unit', 'unit'),
    n: field('n', 'num'),
    nEff: field('nEff', 'num'),
    tau: field('tau', 'num'),
    progressText: field('progress', 'progress-text'),
    progress: new ProgressBar('samples taken of the samples needed for the target'),
    rules: h('span', { className: 'rule-strip', 'aria-label': 'stability rules', hidden: true }),
    trend: new TrendLine(),
    intake: field('intake', 'intake-note'),
  };
  const figure = (label, ...nodes) => h('span', { className: 'figure' }, h('span', { className: 'label', text: label }), ...nodes);
  const element = h(
    'a',
    { className: 'entry', href: `#/channel/${encodeURIComponent(name)}`, role: 'listitem', dataset: { channel: name } },
    h('span', { className: 'entry-rule', 'aria-hidden': 'true' }, parts.glyph),
    h(
      'span',
      { className: 'entry-body' },
      h('span', { className: 'entry-head' }, h('span', { className: 'channel-name' }, breakable(name)), parts.state),
      parts.verdict,
      h('span', { className: 'entry-statement' }, parts.meanLabel, parts.mean, parts.coverage),
      h('span', { className: 'entry-figures' }, figure('last', parts.last, parts.unit), figure('n', parts.n), figure('n_eff', parts.nEff), figure('τ_int', parts.tau), h('span', { className: 'figure trend-figure' }, h('span', { className: 'label', text: 'trend' }), parts.trend.element)),
      h('span', { className: 'entry-progress' }, parts.progress.element, parts.progressText),
      parts.intake,
      parts.rules,
    ),
  );
  return { element, parts, state: null };
}

/** Refusals and gaps since the daemon started, on the entry only when there are some (the channel's view lists them). */
function fillIntake(p, s) {
  const i = s.intake;
  const parts = [];
  if (i?.gaps > 0) parts.push(`${formatCount(i.gaps)} ${i.gaps === 1 ? 'gap' : 'gaps'}, ${formatCount(i.missingSamples)} ${i.missingSamples === 1 ? 'sample' : 'samples'} missing`);
  if (i?.refused > 0) parts.push(`${formatCount(i.refused)} ${i.refused === 1 ? 'sample' : 'samples'} refused`);
  p.intake.hidden = parts.length === 0;
  setText(p.intake, parts.length === 0 ? '' : `※ ${parts.join(' · ')}`);
  p.intake.title = parts.length === 0 ? '' : 'since the daemon started; the channel’s view lists them';
}

function fillChannel(entry, s) {
  fillState(entry, s);
  fillStatement(entry.parts, s);
  fillFigures(entry.parts, s);
  fillProgress(entry.parts, s);
  fillIntake(entry.parts, s);
  renderRuleStrip(entry.parts.rules, s.criteria, s.unit);
}

function fillState(entry, s) {
  const p = entry.parts;
  const state = stateOf(s.state);
  if (entry.state !== s.state) {
    entry.element.className = `entry ${state.className}`;
    setText(p.glyph, state.symbol);
    setText(p.state, `${state.symbol} ${state.label}`);
    p.state.title = state.hint;
    entry.state = s.state;
  }
  const verdict = s.verdict;
  setText(p.verdict, verdict ? (verdict.ready ? 'Ready to record' : `Waiting: ${verdict.summary}`) : state.hint);
  p.verdict.title = verdict && !verdict.ready ? verdict.pending.map((c) => `${c.condition}: ${c.message}`).join('\n') : '';
  p.verdict.classList.toggle('ready', Boolean(verdict?.ready));
}

function fillStatement(p, s) {
  // Before steady state (or after a break) the mean is provisional: it is not a result yet.
  const provisional = !STEADY.has(s.state);
  p.mean.parentElement.classList.toggle('provisional', provisional);
  setText(p.meanLabel, provisional ? 'mean so far' : 'mean ± U');
  if (s.mean === null || s.mean === undefined) {
    setText(p.mean, '–');
    setText(p.coverage, '');
  } else {
    setText(p.mean, formatResult(s.mean, s.expandedUncertainty, unitSuffix(s.unit)));
    setText(p.coverage, s.expandedUncertainty === null ? 'no uncertainty yet' : `(${coverageText(s.coverageFactor, s.confidence)})`);
  }
}

function fillFigures(p, s) {
  setText(p.last, s.last ? formatValue(s.last.value, decimalsFor(s.expandedUncertainty)) : '–');
  setText(p.unit, unitText(s.unit));
  p.unit.title = s.unitNote ?? '';
  setText(p.n, formatCount(s.n));
  setText(p.nEff, formatEffective(s.nEff));
  setText(p.tau, trimNumber(s.tauInt, 3));
}

function fillProgress(p, s) {
  const target = s.target;
  const steady = STEADY.has(s.state);
  let fraction = null;
  let text;
  if (!target) text = 'no target set';
  else if (!steady) text = `target ${target.on} ≤ ${trimNumber(target.bound, 2)}${unitSuffix(s.unit)}: judged once steady`;
  else if (target.reached) {
    fraction = 1;
    text = `target met: ${target.on} ≤ ${trimNumber(target.bound, 2)}${unitSuffix(s.unit)}`;
  } else {
    const progress = samplesProgress(s.n, target);
    if (progress) {
      fraction = progress.fraction;
      text = `${progress.text}${target.secondsToTarget !== null && target.secondsToTarget !== undefined ? ` · ≈ ${formatDuration(target.secondsToTarget)} more` : ''}`;
    } else text = target.note ?? 'estimating…';
  }
  p.progressText.title = target?.note ?? '';
  p.progress.show(fraction, Boolean(target?.reached && steady));
  setText(p.progressText, text);
}

// ---- a derived result's entry -------------------------------------------------------------

function derivedEntry(name) {
  const parts = {
    glyph: h('span', { className: 'entry-glyph', 'aria-hidden': 'true' }),
    state: field('state', 'state-word'),
    verdict: field('verdict', 'entry-verdict'),
    value: field('value', 'statement-value'),
    unit: field('unit', 'unit'),
    valueLabel: h('span', { className: 'label', text: 'value' }),
    uncertainty: field('uncertainty', 'statement-value'),
    coverage: field('coverage', 'statement-coverage'),
    independent: field('independent', 'num'),
    rows: field('rows', 'num'),
    dof: field('dof', 'num'),
    inputs: field('inputs', 'num'),
    progressText: field('progress', 'progress-text'),
    progress: new ProgressBar('progress towards the target uncertainty'),
  };
  const figure = (label, node, title) => h('span', { className: 'figure', title }, h('span', { className: 'label', text: label }), node);
  const element = h(
    'a',
    { className: 'entry derived-entry', href: `#/derived/${encodeURIComponent(name)}`, role: 'listitem', dataset: { derived: name } },
    h('span', { className: 'entry-rule', 'aria-hidden': 'true' }, parts.glyph),
    h(
      'span',
      { className: 'entry-body' },
      h('span', { className: 'entry-head' }, h('span', { className: 'channel-name' }, h('span', { className: 'derived-mark', text: 'ƒ ', 'aria-hidden': 'true' }), breakable(name)), parts.state),
      parts.verdict,
      h('span', { className: 'entry-statement' }, parts.valueLabel, parts.value, parts.uncertainty, parts.coverage),
      h(
        'span',
        { className: 'entry-figures' },
        figure('unit', parts.unit),
        figure('as if uncorrelated', parts.independent, 'the expanded uncertainty computed as if the input channels were uncorrelated (Welch-Satterthwaite): the difference is what their correlation does'),
        figure('rows', parts.rows, 'rows: common time buckets of the input channels'),
        figure('ν_eff', parts.dof, 'degrees of freedom of u_c'),
        figure('inputs steady', parts.inputs, 'input channels steady or precise, of all inputs'),
      ),
      h('span', { className: 'entry-progress' }, parts.progress.element, parts.progressText),
    ),
  );
  return { element, parts, state: null };
}

function fillDerived(entry, d) {
  const p = entry.parts;
  const state = derivedStateOf(d);
  const stateKey = `${state.key}:${state.className}`;
  if (entry.state !== stateKey) {
    entry.element.className = `entry derived-entry ${state.className}`;
    setText(p.glyph, state.symbol);
    setText(p.state, `${state.symbol} ${state.label}`);
    entry.state = stateKey;
  }
  p.state.title = state.hint;
  setText(p.verdict, d.atTarget ? 'Ready to record' : d.waitingFor?.length ? `Waiting: ${d.waitingFor[0]}` : state.hint);
  p.verdict.title = d.waitingFor?.join('\n') ?? '';
  p.verdict.classList.toggle('ready', d.atTarget === true);
  // While an input is not steady the value is provisional, as a channel's mean is.
  const provisional = state.key === 'waiting' || state.key === 'no-value';
  p.value.parentElement.classList.toggle('provisional', provisional);
  setText(p.valueLabel, provisional ? 'value so far' : 'value ± U');
  const unit = unitSuffix(d.unit);
  setText(p.value, d.value === null ? '–' : formatValue(d.value, decimalsFor(d.expandedUncertainty)));
  setText(p.unit, unitText(d.unit));
  if (d.value === null) {
    setText(p.uncertainty, '');
    setText(p.coverage, '');
  } else if (d.expandedUncertainty === null) {
    setText(p.uncertainty, 'no uncertainty yet');
    setText(p.coverage, '');
  } else {
    setText(p.uncertainty, `± ${formatUncertainty(d.expandedUncertainty)}${unit}`);
    setText(p.coverage, `(${coverageText(d.coverageFactor, d.confidence)})`);
  }
  const independent = d.independent?.expandedUncertainty;
  setText(p.independent, independent === null || independent === undefined ? '–' : `± ${formatUncertainty(independent)}${unit}`);
  setText(p.rows, formatCount(d.rows));
  setText(p.dof, trimNumber(d.dof, 3));
  const inputs = Object.values(d.inputStates ?? {});
  setText(p.inputs, `${inputs.filter((s) => STEADY.has(s)).length} of ${inputs.length}`);
  const target = d.target;
  let fraction = null;
  let text;
  if (!target) text = 'no target set';
  else if (target.reached) {
    fraction = d.atTarget ? 1 : null;
    text = d.atTarget ? `target met: ${target.on} ≤ ${trimNumber(target.bound, 3)}${unit}` : 'uncertainty within the target; waiting for the inputs';
  } else if (provisional) text = `target ${target.on} ≤ ${trimNumber(target.bound, 3)}${unit}: judged once the inputs are steady`;
  else if (target.samplesNeeded > 0) {
    fraction = Math.max(0, Math.min(1, d.rows / target.samplesNeeded));
    text = `${formatCount(d.rows)} of ${formatCount(target.samplesNeeded)} rows needed${target.secondsToTarget !== null && target.secondsToTarget !== undefined ? ` · ≈ ${formatDuration(target.secondsToTarget)} more` : ''}`;
  } else text = target.note ?? 'estimating…';
  p.progressText.title = target ? `${target.on} ≤ ${trimNumber(target.bound, 3)}${unit}${target.note ? ` · ${target.note}` : ''}` : '';
  p.progress.show(fraction, d.atTarget === true);
  setText(p.progressText, text);
}
