import type { ChannelSnapshot } from '../engine/channel-pipeline.js';
import type { CriterionState } from '../engine/criteria/criteria-tracker.js';
import { formatDuration, formatSignificant } from './format.js';

/**
 * `plateau analyze --config FILE`: the stability rules the daemon's configuration gives each
 * channel (by its column name, through the same groups: analyze.ts configuredChannels), evaluated
 * on the same accept path as the daemon's (the channel pipeline). JSON: `criteria[{name, holds, since, value, tolerance, margin,
 * ...}]` and `readiness` per channel; the table: a rules column and one line per rule.
 */
/** The table's rules cell: how many hold, or "-" without rules. */
export function criteriaCell(channel: ChannelSnapshot): string {
  if (channel.readiness === null || channel.criteria.length === 0) return '-';
  return `${channel.criteria.filter((c) => c.holds).length}/${channel.criteria.length} hold`;
}

/** One line per rule, under the readiness policy of each channel that has rules. */
export function criteriaLines(channels: readonly ChannelSnapshot[]): string[] {
  const withRules = channels.filter((c) => c.readiness !== null);
  if (withRules.length === 0) return [];
  const lines = ['', 'Stability rules:'];
  for (const c of withRules) {
    const readiness = c.readiness as NonNullable<ChannelSnapshot['readiness']>;
    lines.push(`  ${c.name} (policy ${readiness.policy}): ${readiness.ready ? 'ready' : 'not ready'}`);
    for (const rule of c.criteria) lines.push(`    - ${ruleLine(rule)}`);
  }
  return lines;
}

function ruleLine(rule: CriterionState): string {
  const numbers = `value ${formatSignificant(rule.value)}, tolerance ${formatSignificant(rule.tolerance)}, margin ${formatSignificant(rule.margin)}`;
  if (rule.holds) return `${rule.name}: holds since ${formatTime(rule.since)} (${numbers})`;
  const toGo = rule.secondsToHold !== null ? `; can hold in ${formatDuration(rule.secondsToHold)} at the earliest` : '';
  return `${rule.name}: does not hold: ${rule.pending ?? 'waiting'} (${numbers})${toGo}`;
}

/** A sample time: ISO 8601 for epoch seconds, else seconds as the file gives them. */
function formatTime(seconds: number | null): string {
  if (seconds === null) return '-';
  return seconds > 1e8 ? new Date(seconds * 1000).toISOString() : `t = ${formatSignificant(seconds, 6)} s`;
}
