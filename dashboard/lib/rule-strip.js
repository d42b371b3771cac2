// The rule strip: a channel's stability rules (from the test procedure) in one compact row, one
// chip per rule with its number against the tolerance: a filled mark when the rule holds, a ring
// while its condition is met but its hold is still running, a cross when it is not met. The title
// of each chip says since when it holds or how soon it can at the earliest. Built from data with
// text nodes only (lib/dom.js).

import { h, replaceChildren } from './dom.js';
import { trimNumber, formatDuration } from './format.js';

/** Fills `container` with the strip for `criteria` (the channel summary's), hidden when there are none. */
export function renderRuleStrip(container, criteria, unit) {
  const rules = Array.isArray(criteria) ? criteria : [];
  container.hidden = rules.length === 0;
  const key = JSON.stringify(rules.map((r) => [r.name, r.holds, r.met, r.value, r.tolerance, r.secondsToHold]));
  if (container.dataset.key === key) return;
  container.dataset.key = key;
  replaceChildren(
    container,
    rules.map((rule) => {
      const mark = rule.holds ? '●' : rule.met ? '○' : '✕';
      const state = rule.holds ? 'holds' : rule.met ? 'met' : 'not-met';
      const value = rule.value === null ? '–' : trimNumber(rule.value, 3);
      const tolerance = rule.tolerance === null ? '–' : trimNumber(rule.tolerance, 3);
      return h(
        'span',
        { className: `rule-chip rule-${state}`, title: ruleTitle(rule, unit) },
        h('span', { className: 'rule-mark', 'aria-hidden': 'true', text: mark }),
        h('span', { className: 'rule-name', text: rule.name }),
        h('span', { className: 'rule-value', text: `${value} / ${tolerance}` }),
      );
    }),
  );
}

function ruleTitle(rule, unit) {
  const units = unit ? ` ${unit}` : '';
  const margin = rule.margin === null ? '' : `, margin ${trimNumber(rule.margin, 3)}${units}`;
  if (rule.holds) return `${rule.name}: holds since ${new Date(rule.since * 1000).toLocaleString()}${margin}`;
  const wait = rule.secondsToHold === null ? '' : `; can hold in ${formatDuration(rule.secondsToHold)} at the earliest`;
  return `${rule.name}: ${rule.met ? 'condition met, hold running' : 'does not hold'}${margin}${wait}`;
}
