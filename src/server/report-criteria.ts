import type { ChannelSnapshot } from '../engine/channel-pipeline.js';
import type { RecordCriteria } from '../engine/test-point-record.js';
import type { CriterionEvidence } from '../engine/criteria/readiness-policy.js';
import { escapeHtml } from './html-text.js';

/**
 * The stability rules in the printable report, per channel: the readiness policy and, per rule,
 * whether it held over the whole recorded window, its value, tolerance and margin, the smallest
 * margin since its condition was met, and the public document a preset cites. From the record when
 * there is one (what was recorded), else from the channel now. Empty for a channel without rules.
 */
export function criteriaSection(recorded: RecordCriteria | null | undefined, snapshot: ChannelSnapshot): string {
  const fromRecord = recorded ?? null;
  const live = snapshot.readiness;
  if (fromRecord === null && live === null) return '';
  const policy = fromRecord?.policy ?? live?.policy ?? 'both';
  const ready = fromRecord?.ready ?? live?.ready ?? false;
  const evidence: CriterionEvidence[] = fromRecord?.rules ?? live?.rules.evidence ?? [];
  const rows = evidence.map(
    (e) =>
      `<tr><td>${escapeHtml(e.name)}${e.preset ? `<br><span class="note">${escapeHtml(e.source ?? e.preset)}</span>` : ''}</td><td>${escapeHtml(e.rule)}</td><td>${escapeHtml(heldText(e))}</td><td>${num(e.value)}</td><td>${num(e.tolerance)}</td><td>${num(e.margin)}</td><td>${num(e.worstMargin)}</td><td>${escapeHtml(time(e.since))}</td></tr>`,
  );
  const source = fromRecord !== null ? 'As recorded.' : 'The channel now (no record with rules yet).';
  return `<h3>Stability rules</h3>
<p>Readiness policy: ${escapeHtml(POLICY_TEXT[policy] ?? policy)}; ${ready ? 'ready under it' : 'not ready under it'}. ${escapeHtml(source)}</p>
<table><tr><th>rule</th><th>condition</th><th>over the recorded window</th><th>value</th><th>tolerance</th><th>margin</th><th>smallest margin since met</th><th>condition met since</th></tr>${rows.join('')}</table>
<p class="note">A rule that held shows that the procedure's wording was met by the readings received; check each preset against your copy of its document.</p>`;
}

const POLICY_TEXT: Record<string, string> = {
  statistical: 'the statistical verdict alone',
  rules: 'every stability rule holds',
  both: 'the statistical verdict and every stability rule',
};

function heldText(e: CriterionEvidence): string {
  if (e.heldOverWindow === true) return 'held over the whole window';
  if (e.holds) return 'holds, but not over the whole window';
  return 'does not hold';
}

function num(value: number | null): string {
  if (value === null || !Number.isFinite(value)) return '-';
  if (value !== 0 && (Math.abs(value) >= 1e7 || Math.abs(value) < 1e-4)) return value.toExponential(3);
  return String(Number(value.toPrecision(4)));
}

function time(seconds: number | null): string {
  if (seconds === null || !Number.isFinite(seconds)) return '-';
  return seconds > 1e8 ? new Date(seconds * 1000).toISOString() : `${num(seconds)} s`;
}
