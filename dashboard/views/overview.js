// The overview: one tile per channel, large enough to read across the rig floor. A tile shows the
// latest value, the mean with its expanded uncertainty (with k and the coverage probability),
// n, n_eff and tau_int, the state in words with a symbol and a colour, and a bar towards the
// target precision with the time it still needs at the current rate. Tiles are built once and
// updated in place.
// Derived results (quantities computed from several channels) come first, in tiles of their own:
// value ± U with k and the coverage probability, U as if the inputs were uncorrelated beside it,
// the state in words (waiting for inputs / not yet at target / at target), rows and ν, and the
// progress to the target with the time it still needs.

import { h, setText, breakable } from '../lib/dom.js';
import { ProgressBar } from '../lib/progress-bar.js';
import { renderRuleStrip } from '../lib/rule-strip.js';
import { decimalsFor, formatValue, formatUncertainty, formatResult, formatCount, formatEffective, formatDuration, percent, stateOf, trimNumber, derivedStateOf } from '../lib/format.js';

export class OverviewView {
  constructor(root, app) {
    this.app = app;
    this.tiles = new Map();
    this.grid = h('div', { className: 'tiles', id: 'tiles', role: 'list' });
    this.empty = h('p', { className: 'empty', text: 'Waiting for the first samples… (channels appear as soon as the daemon receives data)' });
    this.summary = h('p', { className: 'overview-summary', 'aria-live': 'polite' });
    this.derivedTiles = new Map();
    this.derivedGrid = h('div', { className: 'tiles derived-tiles', id: 'derived-tiles', role: 'list' });
    this.derivedBlock = h('div', { className: 'derived-block-overview', hidden: true }, h('div', { className: 'view-head' }, h('h1', { text: 'Derived results' }), h('p', { className: 'overview-summary', text: 'computed from several channels, with the covariance of their means' })), this.derivedGrid);
    this.element = h('section', { className: 'view view-overview', 'aria-label': 'All channels' }, this.derivedBlock, h('div', { className: 'view-head' }, h('h1', { text: 'Channels' }), this.summary), this.empty, this.grid);
    root.appendChild(this.element);
  }

  show(visible) {
    this.element.hidden = !visible;
  }

  /** Updates the given channels (all when names is omitted). */
  update(names) {
    const channels = this.app.state.channels;
    const list = names ?? [...channels.keys()];
    let added = false;
    for (const name of list) {
      const summary = channels.get(name);
      if (!summary) continue;
      let tile = this.tiles.get(name);
      if (!tile) {
        tile = this.createTile(name);
        this.tiles.set(name, tile);
        added = true;
      }
      this.fill(tile, summary);
    }
    if (added) {
      const sorted = [...this.tiles.keys()].sort((a, b) => a.localeCompare(b));
      for (const name of sorted) this.grid.appendChild(this.tiles.get(name).element);
    }
    this.empty.hidden = this.tiles.size > 0;
    this.updateSummary();
  }

  updateSummary() {
    const counts = {};
    for (const summary of this.app.state.channels.values()) counts[summary.state] = (counts[summary.state] ?? 0) + 1;
    const parts = ['precise', 'steady', 'warming', 'unsteady', 'stale'].filter((s) => counts[s]).map((s) => `${counts[s]} ${stateOf(s).label.toLowerCase()}`);
    setText(this.summary, parts.length ? parts.join(' · ') : '');
  }

  /** Updates the given derived results (all when names is omitted). */
  updateDerived(names) {
    const derived = this.app.state.derived;
    let added = false;
    for (const name of names ?? [...derived.keys()]) {
      const d = derived.get(name);
      if (!d) continue;
      let tile = this.derivedTiles.get(name);
      if (!tile) {
        tile = this.createDerivedTile(name);
        this.derivedTiles.set(name, tile);
        added = true;
      }
      this.fillDerived(tile, d);
    }
    for (const [name, tile] of this.derivedTiles) {
      if (derived.has(name)) continue;
      tile.element.remove();
      this.derivedTiles.delete(name);
    }
    if (added) for (const name of [...this.derivedTiles.keys()].sort((a, b) => a.localeCompare(b))) this.derivedGrid.appendChild(this.derivedTiles.get(name).element);
    this.derivedBlock.hidden = this.derivedTiles.size === 0;
  }

  createDerivedTile(name) {
    const field = (key, className) => h('span', { className, dataset: { field: key } });
    const parts = {
      badge: h('span', { className: 'badge', dataset: { field: 'state' } }),
      value: field('value', 'big-value'),
      unit: field('unit', 'unit'),
      valueLabel: h('span', { className: 'label', text: 'value' }),
      uncertainty: field('uncertainty', 'mean'),
      coverage: field('coverage', 'coverage'),
      independent: field('independent', 'independent'),
      rows: field('rows', 'num'),
      dof: field('dof', 'num'),
      inputs: field('inputs', 'num'),
      progressText: field('progress', 'progress-text'),
      progress: new ProgressBar('progress towards the target uncertainty'),
    };
    const element = h(
      'a',
      { className: 'tile derived-tile', href: `#/derived/${encodeURIComponent(name)}`, role: 'listitem', dataset: { derived: name } },
      h('div', { className: 'tile-head' }, h('span', { className: 'channel-name' }, h('span', { className: 'derived-mark', text: 'ƒ ', 'aria-hidden': 'true' }), breakable(name)), parts.badge),
      h('div', { className: 'tile-value' }, parts.value, parts.unit),
      h('div', { className: 'tile-mean' }, parts.valueLabel, parts.uncertainty, parts.coverage),
      h('div', { className: 'tile-independent', title: 'the expanded uncertainty computed as if the input channels were uncorrelated (Welch-Satterthwaite): the difference is what their correlation does' }, h('span', { className: 'label', text: 'as if uncorrelated' }), parts.independent),
      h(
        'div',
        { className: 'tile-stats' },
        h('span', { className: 'stat', title: 'rows: common time buckets of the input channels' }, h('span', { className: 'label', text: 'rows' }), parts.rows),
        h('span', { className: 'stat', title: 'degrees of freedom of u_c' }, h('span', { className: 'label', text: 'ν' }), parts.dof),
        h('span', { className: 'stat', title: 'input channels steady (steady or at target) of all inputs' }, h('span', { className: 'label', text: 'inputs steady' }), parts.inputs),
      ),
      h('div', { className: 'tile-progress' }, parts.progress.element, parts.progressText),
    );
    return { element, parts, state: null };
  }

  fillDerived(tile, d) {
    const p = tile.parts;
    const state = derivedStateOf(d);
    const stateKey = `${state.key}:${state.className}`;
    if (tile.state !== stateKey) {
      tile.element.className = `tile derived-tile ${state.className}`;
      p.badge.className = `badge ${state.className}`;
      setText(p.badge, `${state.symbol} ${state.label}`);
      tile.state = stateKey;
    }
    p.badge.title = d.waitingFor?.length ? `${state.hint}: ${d.waitingFor.join('; ')}` : state.hint;
    // While an input is not steady the value is provisional, as a channel's mean is.
    const provisional = state.key === 'waiting' || state.key === 'no-value';
    p.value.parentElement.classList.toggle('provisional', provisional);
    setText(p.valueLabel, provisional ? 'so far' : 'value');
    const unit = d.unit ? ` ${d.unit}` : '';
    const decimals = decimalsFor(d.expandedUncertainty);
    setText(p.value, d.value === null ? '–' : formatValue(d.value, decimals));
    setText(p.unit, d.unit ?? '');
    if (d.value === null) {
      setText(p.uncertainty, '–');
      setText(p.coverage, '');
    } else if (d.expandedUncertainty === null) {
      setText(p.uncertainty, 'no uncertainty yet');
      setText(p.coverage, '');
    } else {
      setText(p.uncertainty, `± ${formatUncertainty(d.expandedUncertainty)}${unit}`);
      setText(p.coverage, `k = ${trimNumber(d.coverageFactor, 3)} · ${percent(d.confidence)}`);
    }
    const independent = d.independent?.expandedUncertainty;
    setText(p.independent, independent === null || independent === undefined ? '–' : `± ${formatUncertainty(independent)}${unit}`);
    setText(p.rows, formatCount(d.rows));
    setText(p.dof, trimNumber(d.dof, 3));
    const inputs = Object.values(d.inputStates ?? {});
    setText(p.inputs, `${inputs.filter((s) => s === 'steady' || s === 'precise').length} of ${inputs.length}`);
    const target = d.target;
    let fraction = 0;
    let text;
    if (!target) text = 'no target set';
    else if (target.reached) {
      fraction = 1;
      text = d.atTarget ? 'target met' : 'uncertainty within the target; waiting for the inputs';
    } else {
      fraction = Math.max(0, Math.min(1, target.progress ?? 0));
      if (target.secondsToTarget !== null && target.secondsToTarget !== undefined) text = `≈ ${formatDuration(target.secondsToTarget)} to target`;
      else text = target.note ?? 'estimating…';
    }
    p.progressText.title = target ? `${target.on} ≤ ${trimNumber(target.bound, 3)}${unit}${target.note ? ` · ${target.note}` : ''}` : '';
    p.progress.show(fraction, target?.reached);
    setText(p.progressText, target && !target.reached ? `${Math.round(fraction * 100)} % · ${text}` : text);
  }

  createTile(name) {
    const field = (key, className) => h('span', { className, dataset: { field: key } });
    const parts = {
      badge: h('span', { className: 'badge', dataset: { field: 'state' } }),
      last: field('last', 'big-value'),
      unit: field('unit', 'unit'),
      mean: field('mean', 'mean'),
      coverage: field('coverage', 'coverage'),
      n: field('n', 'num'),
      nEff: field('nEff', 'num'),
      tau: field('tau', 'num'),
      progressText: field('progress', 'progress-text'),
      verdict: field('verdict', 'tile-verdict'),
      meanLabel: h('span', { className: 'label', text: 'mean' }),
      progress: new ProgressBar('progress towards the target precision'),
    };
    const element = h(
      'a',
      { className: 'tile', href: `#/channel/${encodeURIComponent(name)}`, role: 'listitem', dataset: { channel: name } },
      h('div', { className: 'tile-head' }, h('span', { className: 'channel-name' }, breakable(name)), parts.badge),
      h('div', { className: 'tile-value' }, parts.last, parts.unit),
      h('div', { className: 'tile-mean' }, parts.meanLabel, parts.mean, parts.coverage),
      h(
        'div',
        { className: 'tile-stats' },
        h('span', { className: 'stat' }, h('span', { className: 'label', text: 'n' }), parts.n),
        h('span', { className: 'stat' }, h('span', { className: 'label', text: 'n_eff' }), parts.nEff),
        h('span', { className: 'stat' }, h('span', { className: 'label', text: 'τ_int' }), parts.tau),
      ),
      h('div', { className: 'tile-progress' }, parts.progress.element, parts.progressText),
      parts.verdict,
      (parts.rules = h('div', { className: 'rule-strip', 'aria-label': 'stability rules', hidden: true })),
    );
    return { element, parts, state: null };
  }

  fill(tile, s) {
    const p = tile.parts;
    const state = stateOf(s.state);
    if (tile.state !== s.state) {
      tile.element.className = `tile ${state.className}`;
      p.badge.className = `badge ${state.className}`;
      setText(p.badge, `${state.symbol} ${state.label}`);
      p.badge.title = state.hint;
      tile.state = s.state;
    }
    // Before steady state (or after a break) the mean is provisional: it is not a result yet.
    const provisional = s.state === 'warming' || s.state === 'unsteady';
    p.mean.parentElement.classList.toggle('provisional', provisional);
    setText(p.meanLabel, provisional ? 'mean so far' : 'mean');
    const decimals = decimalsFor(s.expandedUncertainty);
    setText(p.last, s.last ? formatValue(s.last.value, decimals) : '–');
    setText(p.unit, s.unit ?? '');
    if (s.mean === null || s.mean === undefined) {
      setText(p.mean, '–');
      setText(p.coverage, '');
    } else {
      setText(p.mean, formatResult(s.mean, s.expandedUncertainty, s.unit ? ` ${s.unit}` : ''));
      setText(p.coverage, s.expandedUncertainty === null ? 'no uncertainty yet' : `k = ${trimNumber(s.coverageFactor, 3)} · ${percent(s.confidence)}`);
    }
    setText(p.n, formatCount(s.n));
    setText(p.nEff, formatEffective(s.nEff));
    setText(p.tau, trimNumber(s.tauInt, 3));
    const target = s.target;
    let fraction = 0;
    let text;
    if (!target) text = 'no target set';
    else if (target.reached) {
      fraction = 1;
      text = 'target met';
    } else {
      fraction = Math.max(0, Math.min(1, target.progress ?? 0));
      if (target.secondsToTarget !== null && target.secondsToTarget !== undefined) text = `≈ ${formatDuration(target.secondsToTarget)} to target`;
      else if (target.note) text = s.state === 'warming' ? 'waiting for steady state' : 'out of reach in this window';
      else text = 'estimating…';
    }
    if (target?.note) p.progressText.title = target.note;
    p.progress.show(fraction, target?.reached);
    setText(p.progressText, target && !target.reached ? `${Math.round(fraction * 100)} % · ${text}` : text);
    // The verdict in words: ready, or the first thing the channel still waits for.
    const verdict = s.verdict;
    setText(p.verdict, verdict ? (verdict.ready ? 'ready to record' : `waiting: ${verdict.summary}`) : '');
    p.verdict.title = verdict && !verdict.ready ? verdict.pending.map((c) => `${c.condition}: ${c.message}`).join('\n') : '';
    p.verdict.classList.toggle('ready', Boolean(verdict?.ready));
    renderRuleStrip(p.rules, s.criteria, s.unit);
  }
}
