import { unitLabel } from '../engine/unit-label.js';
import type { TestPoint } from '../engine/test-points.js';
import type { RecordEntry, RecordTrace, TestPointRecord } from '../engine/test-point-record.js';
import { RECORD_CAUTION, decimateTrace, gumStatement, rigText } from '../engine/test-point-record.js';
import type { ChannelSnapshot } from '../engine/channel-pipeline.js';
import type { DerivedReportEntry } from '../engine/derived/derived-record.js';
import { escapeHtml } from './html-text.js';
import { svgBarChart, svgChart, type SvgBar } from './svg-chart.js';
import { recordDerivedEntries } from './record-derived.js';
import { criteriaSection } from './report-criteria.js';
import type { ChannelTrace, CusumTrace, DerivedView } from '../ports/daemon-api.js';
import type { CombinedReport, ConformityReport } from '../engine/channel-combined.js';

/**
 * The printable test-point report (HTML, for print to PDF): per channel the result in the wording
 * of JCGM 100:2008 7.2.4 (y = mean, U = k*u, k from the t-distribution for nu_eff at the stated
 * coverage probability), how the standard uncertainty was estimated (the tau_int estimator and the
 * others beside it), the steady-state evidence (warm-up cut, Heidelberger-Welch, Geweke, KPSS on
 * block means, MSER, Cao-Rhinehart, CUSUM, the last break) and four charts drawn as inline SVG (no
 * script, no external asset): the trace with the mean and its expanded-uncertainty band and the
 * warm-up shaded, the autocorrelation function with the summation window, the Allan deviation on
 * log-log axes with the averaging limit, the CUSUM sums against the decision interval. Then per
 * derived result of the test point: the result in the same wording (value, u, nu, k, U), the
 * interval as if its inputs were uncorrelated, the uncertainty budget as a bar chart (each input's
 * variance term and each covariance term in % of u_c^2: negative covariance terms are drawn to the
 * left of zero, as they reduce u_c) with its table, the correlations with the other derived results,
 * and, from the record, the Monte Carlo check (JCGM 101:2008) and the bootstrap check. Then the
 * cautions. Every text from the network (names, units, notes) is escaped.
 *
 * One window throughout (issue 10, honest records): when a record exists, everything a channel's
 * section shows (the result, the estimators, the evidence, the charts) is what the record froze when
 * it was written (`RecordEntry.evidence`), never the channel as it is when the report is opened. A
 * test point with no record yet shows its own window now, and says so. A record written before
 * records carried their evidence shows the live window for the evidence and says that too.
 */
export interface ReportChannel {
  name: string;
  unit: string | null;
  snapshot: ChannelSnapshot;
  trace: RecordTrace | null;
  cusum: CusumTrace | null;
}

export interface ReportInput {
  point: TestPoint & { verdict?: { channel: string; state: string; reached: boolean }[] };
  record: TestPointRecord | null;
  /** The test point's windows now, for the channels the record has no evidence of (none recorded yet, or an older record). */
  live: ReportChannel[];
  /** The current view of the test point's derived results (shown where the record has none). */
  derived?: DerivedView[];
  generatedMs: number;
  version: string;
  /** The rig as the configuration names it (records carry it too). */
  rig?: string | null;
}

/** A live trace (consecutive samples) in the form a record keeps. */
export function reportTrace(trace: ChannelTrace): RecordTrace {
  return decimateTrace(trace);
}

/** The sections' sources: the record's evidence per channel, else the live window. */
function reportChannels(input: ReportInput): { channel: ReportChannel; fromRecord: boolean }[] {
  const out: { channel: ReportChannel; fromRecord: boolean }[] = [];
  for (const name of input.point.channels) {
    const entry = input.record?.entries.find((e) => e.channel === name);
    if (entry?.evidence) {
      out.push({ channel: { name, unit: entry.unit, snapshot: entry.evidence.snapshot, trace: entry.evidence.trace, cusum: entry.evidence.cusum }, fromRecord: true });
      continue;
    }
    const live = input.live.find((c) => c.name === name);
    if (live) out.push({ channel: live, fromRecord: false });
  }
  return out;
}

const ESTIMATOR_TEXT: Record<string, string> = {
  ar: 'the spectral density at zero frequency of an autoregressive fit, order by AIC (Heidelberger and Welch 1983; the estimator behind R coda spectrum0.ar); nu_eff by the delta method on the Yule-Walker estimates',
  beran: "Beran's law for long memory, var = s^2 n^(2H - 2) with the Hurst exponent H from the local Whittle estimator (Robinson 1995): a scale, not a calibrated interval",
  obm: 'overlapping batch means with batches of sqrt(n) samples (Meketon and Schmeiser 1984); nu_eff = 1.5 (n / b - 1)',
  lugsail: 'lugsail batch means, 2 sigma2(b) - sigma2(b/2) (Vats and Flegal 2022, with r = 2); nu_eff = batches - 1',
  geyer: "Geyer's initial monotone sequence estimator of the integrated autocorrelation time (C. J. Geyer 1992, Statistical Science 7, 473-483); nu_eff = n / (2M + 1) for the summation window M",
  sokal: "Sokal's automatic window (smallest M with M >= 5 tau_int(M)); nu_eff = n / (2M + 1)",
  'batch-means': 'non-overlapping batch means with batches near sqrt(n) samples long; nu_eff = batches - 1',
  blocking: "the blocking method of Flyvbjerg and Petersen with Jonsson's automatic level choice, taken one level up and lugsail-corrected",
  iid: 'independent observations (GUM 4.2.3): s / sqrt(n) with n - 1 degrees of freedom',
};

export function renderReport(input: ReportInput): string {
  const { point, record } = input;
  const generated = new Date(input.generatedMs).toISOString();
  const channels = reportChannels(input);
  const sections = channels.map(({ channel, fromRecord }) => channelSection(channel, record?.entries.find((e) => e.channel === channel.name) ?? null, record, fromRecord));
  const missing = point.channels.filter((name) => !channels.some((c) => c.channel.name === name));
  // The state now only while the test point runs (its own window); a stopped one has only its record.
  const running = point.state !== 'stopped';
  const verdictRows = point.channels.map((name) => {
    const now = point.verdict?.find((v) => v.channel === name)?.state ?? 'no data';
    const recorded = record?.entries.find((e) => e.channel === name);
    const recordedText = recorded ? `${STATE_TEXT[recorded.state] ?? recorded.state}${recorded.provisional ? ' (provisional)' : ''}` : '-';
    return `<tr><td>${escapeHtml(name)}</td>${running ? `<td>${escapeHtml(STATE_TEXT[now] ?? now)}</td>` : ''}<td>${escapeHtml(recordedText)}</td></tr>`;
  });
  const recordedDerived = recordDerivedEntries(record?.derived);
  for (const name of point.derived ?? []) {
    const live = input.derived?.find((d) => d.name === name);
    const recorded = recordedDerived.find((d) => d.name === name);
    verdictRows.push(`<tr><td>${escapeHtml(name)} (derived)</td>${running ? `<td>${escapeHtml(live ? derivedStateText(live) : 'no data')}</td>` : ''}<td>${escapeHtml(recorded ? derivedStateText(recorded) : '-')}</td></tr>`);
  }
  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8"><meta name="viewport" content="width=device-width, initial-scale=1">
<title>Test point report: ${escapeHtml(point.name)}</title>
<style>
body{font:12.5px/1.45 "Segoe UI",Roboto,"DejaVu Sans",sans-serif;color:#1d2430;max-width:62rem;margin:1.5rem auto;padding:0 1.2rem}
header{border-bottom:2px solid #1d2430;padding-bottom:.5rem;margin-bottom:1rem}
h1{font-size:1.45rem;margin:0 0 .2rem}h2{font-size:1.12rem;margin:1.8rem 0 .5rem;padding-bottom:.15rem;border-bottom:1px solid #b8c2ce}
h3{font-size:.95rem;margin:1rem 0 .3rem}
table{border-collapse:collapse;margin:.3rem 0 .6rem}td,th{padding:.12rem .55rem;text-align:left;border-bottom:1px solid #e3e8ee;vertical-align:top;font-variant-numeric:tabular-nums}
th{font-weight:600;color:#394452}
.meta td:first-child{color:#4a5563}
.statement{background:#f1f5f8;padding:.6rem .8rem;border-left:4px solid #2f6b8a;font-size:13px;margin:.4rem 0}
.statement.none{border-left-color:#b5651d}
.provisional{background:#fbeee0;padding:.5rem .8rem;border-left:4px solid #b5651d;font-size:13px;margin:.4rem 0}
table.budget tr.covariance td{font-style:italic}
table.budget tr.total td{font-weight:600;border-top:2px solid #555}
.grid{display:flex;flex-wrap:wrap;gap:.4rem 1rem}
.note{color:#4a5563}
.caution{margin-top:2rem;padding:.7rem .9rem;border:1.5px solid #b5651d;background:#fff8f0}
.caution li{margin:.2rem 0}
svg{display:block;margin:.2rem 0}
footer{margin-top:1.5rem;color:#4a5563;font-size:11px}
@media print{body{margin:0;max-width:none}h2{break-after:avoid}section{break-inside:avoid-page}.grid{break-inside:avoid}a{color:inherit;text-decoration:none}}
@page{margin:16mm 12mm 16mm;@top-left{content:"${cssText(`${rigText(record?.rig) ? `${rigText(record?.rig)}, ` : ''}test point ${point.id}${record?.recordNumber ? `, record ${record.recordNumber}` : ', no record yet'}`)}";font-size:9px;color:#4a5563}@top-right{content:"plateau ${cssText(input.version)}";font-size:9px;color:#4a5563}@bottom-right{content:"page " counter(page) " of " counter(pages);font-size:9px;color:#4a5563}}
table.budget{break-inside:avoid}
</style></head><body>
<header>
<h1>Test point report: ${escapeHtml(point.name)}</h1>
<table class="meta">
${rigText(record?.rig) ? `<tr><td>Rig</td><td>${escapeHtml(rigText(record?.rig) as string)}</td></tr>` : ''}
<tr><td>Test point</td><td>${escapeHtml(point.id)}</td></tr>
<tr><td>State</td><td>${escapeHtml(POINT_STATE_TEXT[point.state] ?? point.state)}</td></tr>
<tr><td>Started</td><td>${escapeHtml(iso(point.createdMs))}</td></tr>
${point.readyMs ? `<tr><td>Ready</td><td>${escapeHtml(iso(point.readyMs))}</td></tr>` : ''}
${point.stoppedMs ? `<tr><td>Stopped</td><td>${escapeHtml(iso(point.stoppedMs))}</td></tr>` : ''}
<tr><td>Record</td><td>${record ? `written ${escapeHtml(record.createdAt)} when the test point ${record.kind === 'ready' ? 'became ready' : 'was stopped'}` : 'none yet: the values below are the current ones, not a record'}</td></tr>
${record?.recordNumber ? `<tr><td>Record number</td><td>${escapeHtml(record.recordNumber)}${record.provisional ? ' (provisional: some channel was not ready, see its section)' : ''}</td></tr>` : ''}
<tr><td>Report generated</td><td>${escapeHtml(generated)} by plateau ${escapeHtml(input.version)}</td></tr>
</table>
</header>
<h2>Verdict</h2>
<p>${escapeHtml(verdictText(point))}</p>
<table><tr><th>channel</th>${running ? '<th>state now (its window in this test point)</th>' : ''}<th>state in the record</th></tr>${verdictRows.join('')}</table>
${missing.length ? `<p class="note">No data received for: ${escapeHtml(missing.join(', '))}.</p>` : ''}
${point.annotations.length ? `<h2>Notes</h2><ul>${point.annotations.map((a) => `<li>${escapeHtml(iso(a.timeMs))}: ${escapeHtml(a.text)}</li>`).join('')}</ul>` : ''}
${sections.join('\n')}
${derivedSections(point, record, input.derived ?? [])}
<section class="caution"><strong>Cautions</strong><ul>
<li>${escapeHtml(RECORD_CAUTION)}</li>
<li>${escapeHtml(typeBCaution(record))}</li>
<li>The coverage probability holds only while the channel is stationary over the averaging window; the evidence above is statistical and can miss a slow drift that an engineer would recognise.</li>
<li>This report was generated by software. It must be reviewed and approved by a competent person before it is issued.</li>
</ul></section>
<footer>plateau ${escapeHtml(input.version)} · ${escapeHtml(generated)}</footer>
</body></html>`;
}

const STATE_TEXT: Record<string, string> = {
  warming: 'warming up',
  steady: 'steady, target not reached',
  precise: 'steady and at target precision',
  unsteady: 'not steady (a break was detected)',
  stale: 'no recent data',
};

const POINT_STATE_TEXT: Record<string, string> = { running: 'running (not yet ready)', ready: 'ready', stopped: 'stopped' };

/** Who the figures are for and what they do not cover: Type A alone, or the budget's components and nothing else. */
function typeBCaution(record: TestPointRecord | null): string {
  const withBudget = (record?.entries ?? []).filter((e) => e.combined?.budget.some((b) => b.evaluation === 'B')).map((e) => e.channel);
  const typeA = 'The uncertainties stated here are the Type A (statistical) standard uncertainty of each mean, allowing for autocorrelation';
  if (withBudget.length === 0) return `${typeA}. They do not include Type B contributions (sensor calibration, resolution, installation, reference values): combine those according to the applicable procedure before stating a calibration or test result.`;
  return `${typeA}, combined for ${withBudget.join(', ')} with the Type B components listed in its budget and nothing else. Any contribution not listed there (for the other channels, every Type B contribution) must be combined according to the applicable procedure before stating a calibration or test result.`;
}

function chartNote(channel: ReportChannel, fromRecord: boolean, record: TestPointRecord | null): string {
  const t = channel.trace;
  const thinned = t?.decimation ? `; the trace draws ${t.values.length} of its ${t.samples} samples (${t.decimation})` : '';
  return fromRecord ? `Charts show the recorded window (n = ${channel.snapshot.n}, record ${record?.recordNumber ?? record?.createdAt ?? ''})${thinned}.` : `Charts show this test point's window when the report was generated (n = ${channel.snapshot.n})${thinned}.`;
}

function verdictText(point: TestPoint): string {
  if (point.state === 'ready') return 'Ready: every channel reached steady state and its target precision.';
  if (point.state === 'running') return 'Not ready yet: not every channel is steady at its target precision.';
  return point.readyMs ? 'Stopped after it was ready.' : 'Stopped before every channel was steady at its target precision.';
}

function channelSection(channel: ReportChannel, entry: RecordEntry | null, record: TestPointRecord | null, fromRecord: boolean): string {
  const s = channel.snapshot;
  const unit = channel.unit ? ` ${unitLabel(channel.unit)}` : '';
  const statement = entry?.statement ?? gumStatement(s.name, s.mean, s.standardUncertainty, s.expandedUncertainty, s.coverageFactor, s.dof, s.confidence, channel.unit === null ? null : unitLabel(channel.unit));
  const source = entry ? `Recorded ${record?.createdAt ?? ''}${fromRecord ? '; everything in this section (the result, the estimators, the evidence and the charts) is of the recorded window' : '; the estimators, evidence and charts below are of the window now (this record was written before records kept them)'}.` : "Current value of this test point's window (no record for this channel yet).";
  const values = entry ?? {
    mean: s.mean,
    standardUncertainty: s.standardUncertainty,
    dof: s.dof,
    coverageFactor: s.coverageFactor,
    expandedUncertainty: s.expandedUncertainty,
    confidence: s.confidence,
    n: s.n,
    nEff: s.nEff,
    tauInt: s.tauInt,
    estimator: s.estimator,
    excluded: s.excluded,
    windowStartTime: isoSeconds(s.window.startTime),
    windowEndTime: isoSeconds(s.window.endTime),
  };
  const result: [string, string][] = [
    ['estimate y (mean of the window)', `${num(values.mean, 10)}${unit}`],
    ['standard uncertainty u', `${num(values.standardUncertainty, 3)}${unit}`],
    ['effective degrees of freedom nu_eff', num(values.dof, 3)],
    ['coverage factor k', num(values.coverageFactor, 4)],
    ['expanded uncertainty U = k u', `${num(values.expandedUncertainty, 3)}${unit}`],
    ['coverage probability', `${num(values.confidence * 100, 4)} %`],
    ['samples n; effective n_eff', `${values.n}; ${num(values.nEff, 4)}`],
    ['integrated autocorrelation time tau_int', `${num(values.tauInt, 4)} samples`],
    ['averaging window', `${values.windowStartTime ?? '-'} to ${values.windowEndTime ?? '-'}`],
    ['samples excluded as warm-up (or before a break)', String(values.excluded)],
  ];
  const estimator = values.estimator;
  const estimatorRows = Object.entries(s.estimators).map(
    ([name, e]) => `<tr><td>${escapeHtml(name)}${name === s.estimator ? ' (used)' : ''}</td><td>${num(e.tauInt, 4)}</td><td>${num(e.nEff, 4)}</td><td>${num(e.standardUncertainty, 3)}</td><td>${num(e.dof, 3)}</td><td>${escapeHtml(String(e.window))}</td><td>${e.reliable ? 'yes' : `no${e.note ? `: ${escapeHtml(e.note)}` : ''}`}</td></tr>`,
  );
  const tests = s.stationarity?.tests;
  const evidence: [string, string][] = [
    [fromRecord ? 'state when the record was made' : 'state now', STATE_TEXT[s.state] ?? s.state],
    ['steady from sample', s.stationarity?.warmupEnd === null || !s.stationarity ? 'not steady' : String(s.stationarity.warmupEnd)],
    ['MSER truncation (batch means)', tests?.mser ? `${tests.mser.truncation} samples, batches of ${tests.mser.batchSize}${tests.mser.tooShort ? ' (window too short)' : ''}` : '-'],
    ['Heidelberger-Welch stationarity test', tests?.heidelbergerWelch ? `${tests.heidelbergerWelch.passed ? 'passed' : 'failed'} (p = ${num(tests.heidelbergerWelch.pValue, 3)})` : '-'],
    ['Geweke z (first 10 % against last 50 %)', tests?.geweke ? `${num(tests.geweke.statistic, 3)}${tests.geweke.passed === null ? '' : tests.geweke.passed ? ' (|z| < 1.96)' : ' (|z| >= 1.96)'}` : '-'],
    ['KPSS level test on block means', tests?.kpss ? `${num(tests.kpss.statistic, 3)}: ${tests.kpss.passed ? 'stationarity not rejected' : 'stationarity rejected'} at 5 %` : '-'],
    ['Cao-Rhinehart ratio', tests?.caoRhinehart ? `${num(tests.caoRhinehart.statistic, 3)} against ${num(tests.caoRhinehart.critical, 3)}` : '-'],
    ['CUSUM on block means', tests?.cusum ? `upper ${num(tests.cusum.upper, 3)}, lower ${num(tests.cusum.lower, 3)} against h = ${num(tests.cusum.decisionInterval, 3)} (${tests.cusum.blocks} blocks of ${tests.cusum.blockSize})` : 'not monitoring (not steady)'],
    ['last break', s.stationarity?.lastBreak ? `${s.stationarity.lastBreak.cause} at sample ${s.stationarity.lastBreak.changePoint}${s.stationarity.lastBreak.detail ? `: ${s.stationarity.lastBreak.detail}` : ''}` : 'none'],
    ['averaging limit (Allan deviation)', s.averagingLimit ? `reached at m = ${s.averagingLimit.m}${s.averagingLimit.tauSeconds !== null ? ` (${num(s.averagingLimit.tauSeconds, 3)} s)` : ''}: longer averaging does not reduce the scatter further` : 'none found in this window'],
  ];
  return `<section><h2>${escapeHtml(channel.name)}${channel.unit ? ` (${escapeHtml(unitLabel(channel.unit))})` : ''}</h2>
<p class="statement${entry && !entry.provisional ? '' : ' none'}">${escapeHtml(statement)}</p>
<p class="note">${escapeHtml(source)}</p>
${provisionalBlock(entry)}<h3>${entry?.provisional ? 'Figures of the window (provisional: not a result to report)' : 'Result'}</h3>
<table>${rows(result)}</table>
${combinedBlock(entry ? (entry.combined ?? null) : s.combined, entry ? (entry.conformity ?? null) : s.conformity, unit)}${(entry ? (entry.conformity ?? null) : s.conformity) === null ? '<p class="note">Conformity: no specification limits are configured for this channel, so no decision rule applies and no statement of conformity is made.</p>\n' : ''}
<h3>Standard uncertainty of the mean</h3>
<p>Estimated with ${escapeHtml(ESTIMATOR_TEXT[estimator] ?? estimator)}${s.estimatorReason ? ` (${escapeHtml(s.estimatorReason)})` : ''}. The other estimators on the same window, for comparison${s.n !== values.n ? ` (window now n = ${s.n})` : ''}:</p>
<table><tr><th>estimator</th><th>tau_int</th><th>n_eff</th><th>u</th><th>nu</th><th>window / batch</th><th>reliable</th></tr>${estimatorRows.join('')}</table>
${s.disagreement.length ? `<p class="note">Disagreement: ${escapeHtml(s.disagreement.join('; '))}</p>` : ''}
<h3>Steady-state evidence</h3>
<table>${rows(evidence)}</table>
${criteriaSection(entry?.criteria, s)}
${s.notes.length ? `<p class="note">Notes: ${escapeHtml(s.notes.join('; '))}</p>` : ''}
<div class="grid">${traceChart(channel)}${acfChart(s)}${allanChart(s)}${cusumChart(channel.cusum)}</div>
<p class="note">${escapeHtml(chartNote(channel, fromRecord, record))}</p>
</section>`;
}

/** A derived result's state in words: the verdict of derived-results.ts. */
function derivedStateText(d: Pick<DerivedReportEntry, 'ready' | 'atTarget' | 'inputStates' | 'target'>): string {
  if (!d.ready) return 'no value yet (too few common rows of its inputs)';
  const unsteady = Object.entries(d.inputStates ?? {}).filter(([, state]) => state !== 'steady' && state !== 'precise');
  if (unsteady.length > 0) return `waiting for its inputs (${unsteady.map(([name, state]) => `${name} ${state}`).join(', ')})`;
  if (d.atTarget === null || d.target === null) return 'inputs steady, no target set';
  return d.atTarget ? 'at target' : 'inputs steady, not yet at target';
}

function derivedSections(point: TestPoint, record: TestPointRecord | null, live: DerivedView[]): string {
  const recorded = recordDerivedEntries(record?.derived);
  const names = [...(point.derived ?? [])];
  for (const entry of recorded) if (!names.includes(entry.name)) names.push(entry.name);
  if (names.length === 0) return '';
  return names
    .map((name) => {
      const entry = recorded.find((d) => d.name === name) ?? null;
      const current = live.find((d) => d.name === name) ?? null;
      return derivedSection(name, entry, current, record);
    })
    .join('\n');
}

function derivedSection(name: string, entry: DerivedReportEntry | null, current: DerivedView | null, record: TestPointRecord | null): string {
  const d: (DerivedReportEntry | DerivedView) | null = entry ?? current;
  if (d === null) return `<section><h2>${escapeHtml(name)} (derived)</h2><p class="statement none">${escapeHtml(`${name}: no value (the derived result is not known to this daemon and not in the record)`)}</p></section>`;
  const unit = d.unit ? ` ${unitLabel(d.unit)}` : '';
  const source = entry ? `Recorded ${record?.createdAt ?? ''}.` : 'Current value (no record of this derived result yet).';
  const independent = d.independent;
  const result: [string, string][] = [
    ['model', d.expression],
    ['inputs (channel means)', d.inputs.join(', ')],
    ['estimate y', `${num(d.value, 10)}${unit}`],
    ['combined standard uncertainty u_c', `${num(d.standardUncertainty, 3)}${unit}`],
    ['degrees of freedom nu', `${num(d.dof, 3)}${d.dofMethod === 'batches' ? ` (batches - 1, ${d.batches ?? '-'} batches of ${d.batchSize ?? '-'} rows)` : d.dofMethod === 'observations' ? ' (rows - 1, rows taken as independent)' : ''}`],
    ['coverage factor k', num(d.coverageFactor, 4)],
    ['expanded uncertainty U = k u_c', `${num(d.expandedUncertainty, 3)}${unit}`],
    ['coverage probability', `${num(d.confidence * 100, 4)} %`],
    ['as if the inputs were uncorrelated (Welch-Satterthwaite)', independent ? `u = ${num(independent.standardUncertainty, 3)}${unit}, nu = ${num(independent.dof, 3)}, k = ${num(independent.coverageFactor, 4)}, U = ${num(independent.expandedUncertainty, 3)}${unit}` : '-'],
    ['rows (common time buckets)', `${d.rows}${d.bucketSeconds !== null ? ` of ${num(d.bucketSeconds, 3)} s` : ''}; multivariate effective sample size ${num(d.multivariateEss, 4)}`],
    ['covariance of the means', DERIVED_ESTIMATOR_TEXT[d.estimator] ?? d.estimator],
    ['window', d.window ? `${isoSeconds(d.window.startSeconds) ?? '-'} to ${isoSeconds(d.window.endSeconds) ?? '-'}` : '-'],
    ['target', d.target ? `${d.target.on} <= ${num(d.target.bound, 3)}${unit}${d.target.relative ? ` (${num(d.target.value * 100, 3)} % of |y|)` : ''}: ${d.target.reached ? 'met' : 'not met'}` : 'none'],
    ['state', derivedStateText(d)],
  ];
  if (d.waitingFor.length > 0) result.push(['waiting for', d.waitingFor.join('; ')]);
  const u2 = d.standardUncertainty !== null && d.standardUncertainty > 0 ? d.standardUncertainty ** 2 : null;
  const budgetRows = d.budget.map(
    (b) => `<tr><td>${escapeHtml(b.channel)}</td><td>${escapeHtml(d.inputStates[b.channel] ?? '-')}</td><td>${escapeHtml(num(b.mean, 8))}</td><td>${escapeHtml(num(b.standardUncertainty, 3))}</td><td>${escapeHtml(num(b.sensitivity, 4))}</td><td>${escapeHtml(num(b.contribution, 3))}</td><td>${escapeHtml(percentText(b.varianceShare))}</td><td>${escapeHtml(percentText(b.share))}</td></tr>`,
  );
  const covarianceRows = d.covarianceTerms.map(
    (c) => `<tr><td>${escapeHtml(`${c.channels[0]} × ${c.channels[1]}`)}</td><td>${escapeHtml(num(c.correlation, 3))}</td><td>${escapeHtml(num(c.term, 3))}</td><td>${escapeHtml(percentText(u2 === null ? null : c.term / u2))}</td></tr>`,
  );
  const correlations = Object.entries(d.correlation ?? {});
  return `<section><h2>${escapeHtml(name)}${d.unit ? ` (${escapeHtml(unitLabel(d.unit))})` : ''}: derived result</h2>
<p class="statement${entry ? '' : ' none'}">${escapeHtml(entry?.statement ?? current?.statement ?? '')}</p>
<p class="note">${escapeHtml(source)}</p>
<h3>Result</h3>
<table>${rows(result)}</table>
<h3>Uncertainty budget</h3>
<p>Law of propagation of uncertainty with correlated inputs (JCGM 100:2008, 5.2, eq. (13)) at the means of the input channels over their common window. Each input's variance term c<sub>i</sub>² u²(x<sub>i</sub>) and each covariance term 2 c<sub>i</sub> c<sub>j</sub> u(x<sub>i</sub>, x<sub>j</sub>), as a share of u<sub>c</sub>²: they add to 100 %; a negative covariance term reduces u<sub>c</sub>.</p>
${budgetChart(d)}
<table><tr><th>input</th><th>state</th><th>mean</th><th>u(x_i)</th><th>sensitivity c_i</th><th>c_i u(x_i)</th><th>c_i² u²(x_i) / u_c²</th><th>share with covariance</th></tr>${budgetRows.join('')}</table>
${covarianceRows.length ? `<table><tr><th>covariance term</th><th>r of the means</th><th>2 c_i c_j u(x_i, x_j)</th><th>share of u_c²</th></tr>${covarianceRows.join('')}</table>` : ''}
<p class="note">${escapeHtml(covarianceText(d))}</p>
${combinedBlock(d.combined ?? null, d.conformity ?? null, unit)}
${correlations.length ? `<h3>Correlation with the other derived results</h3><table><tr><th>derived result</th><th>r</th></tr>${correlations.map(([other, r]) => `<tr><td>${escapeHtml(other)}</td><td>${escapeHtml(num(r, 3))}</td></tr>`).join('')}</table>` : ''}
${entry ? monteCarloBlock(entry, unit) + bootstrapBlock(entry, unit) : '<p class="note">The Monte Carlo (JCGM 101) and bootstrap checks are computed when the record is written.</p>'}
${otherNotes(d).length ? `<p class="note">Notes: ${escapeHtml(otherNotes(d).join('; '))}</p>` : ''}
</section>`;
}

/** Text for a CSS string of the running header: letters, digits and a few marks only (ids are already restricted so). */
function cssText(text: string): string {
  return text.replace(/[^A-Za-z0-9 _.,:/()-]/g, '?').slice(0, 120);
}

/** A provisional record entry: said before the result, with the reasons (issue 10, honest records). */
function provisionalBlock(entry: RecordEntry | null): string {
  if (!entry?.provisional) return '';
  const reasons = entry.provisionalReasons ?? [];
  return `<p class="provisional"><strong>Provisional.</strong> This channel was not ready when the record was made, so its figures are not a measurement result to report${reasons.length ? `: ${escapeHtml(reasons.join('; '))}` : ''}.</p>\n`;
}

const VERDICT_TEXT: Record<string, string> = { pass: 'pass', 'conditional-pass': 'conditional pass', 'conditional-fail': 'conditional fail', fail: 'fail' };
const RULE_TEXT: Record<string, string> = {
  simple: 'simple acceptance: the measured value against the limits, no guard band (ILAC-G8:09/2019 4.2.1)',
  guarded: 'guarded acceptance, binary: acceptance limits inside the tolerance by the guard band w (ILAC-G8:09/2019 4.2.2)',
  'non-binary': 'guarded, non-binary: pass, conditional pass, conditional fail, fail (ILAC-G8:09/2019 4.2.3)',
};

/**
 * The combined uncertainty with its budget (one line per component, the covariance lines of
 * correlated or shared sources, the closing u_c, nu_eff, k, U) and conformity with the stated
 * decision rule and the conformance probability (issue 10).
 */
function combinedBlock(c: CombinedReport | null, f: ConformityReport | null, unit: string): string {
  if (c === null) return '';
  const hasTypeB = c.budget.some((b) => b.evaluation !== 'A');
  let html = '';
  if (hasTypeB || c.budget.length > 1) {
    const lines = c.budget.map(
      (b) =>
        `<tr${b.evaluation === 'covariance' ? ' class="covariance"' : ''}><td>${escapeHtml(b.quantity)}</td><td>${escapeHtml(b.component)}${b.proposed ? ' (proposed from the readings)' : ''}</td><td>${escapeHtml(b.evaluation === 'covariance' ? '-' : b.evaluation)}</td><td>${escapeHtml(num(b.estimate, 6))}</td><td>${escapeHtml(num(b.standardUncertainty, 3))}</td><td>${escapeHtml(b.distribution)}</td><td>${escapeHtml(num(b.sensitivity, 4))}</td><td>${escapeHtml(num(b.contribution, 3))}</td><td>${escapeHtml(b.dof === null ? '∞' : num(b.dof, 3))}</td><td>${escapeHtml(percentText(b.share))}</td></tr>`,
    );
    html += `<h3>Uncertainty budget</h3>
<p>Every source of uncertainty with its evaluation (A: statistical, B: otherwise; GUM 4.2, 4.3), its value, standard uncertainty, assumed distribution, sensitivity coefficient, contribution c u to the result, degrees of freedom and share of u<sub>c</sub>² (covariance lines: sources common to two inputs, fully correlated when they are the same reference).</p>
<table class="budget"><tr><th>quantity</th><th>source</th><th>type</th><th>value used</th><th>standard uncertainty</th><th>distribution</th><th>sensitivity</th><th>contribution</th><th>degrees of freedom</th><th>share of u_c²</th></tr>${lines.join('')}
<tr class="total"><td colspan="4">combined: u_c = ${escapeHtml(num(c.standardUncertainty, 3))}${escapeHtml(unit)}</td><td colspan="2">nu_eff = ${escapeHtml(c.dof === null ? '∞' : num(c.dof, 3))} (Welch-Satterthwaite)</td><td colspan="2">k = ${escapeHtml(num(c.coverageFactor, 4))}</td><td colspan="2">U = ${escapeHtml(num(c.expandedUncertainty, 3))}${escapeHtml(unit)} (${escapeHtml(num(c.confidence * 100, 4))} %)</td></tr></table>
${c.notes.length ? `<p class="note">${escapeHtml(c.notes.join('; '))}</p>` : ''}`;
  }
  if (c.stopping) {
    const st = c.stopping;
    html += `<p class="note">Stopping rule: ${escapeHtml(st.stop ? `met (${st.reason === 'dominance' ? `the statistical part u_A <= ${st.fraction} u_c` : st.target?.basis === 'type-a' ? 'the target on the Type A part' : 'the target on the combined uncertainty'})` : st.waitingFor === null ? 'cannot be met in this window' : `not met; waiting for ${st.waitingFor === 'dominance' ? `u_A <= ${st.fraction} u_c` : st.target?.basis === 'type-a' ? 'the Type A target' : 'the combined target'}`)}${st.typeARatio === null ? '' : escapeHtml(`; u_A = ${st.typeARatio.toFixed(2)} u_c`)}.</p>`;
  }
  if (f !== null) {
    const limits = `${f.lower === null ? '-' : num(f.lower, 8)} to ${f.upper === null ? '-' : num(f.upper, 8)}${unit}`;
    const table: [string, string][] = [
      ['decision rule', RULE_TEXT[f.rule] ?? f.rule],
      ['specification limits', limits],
      ['guard band w', f.guardBand === null ? '-' : `${num(f.guardBand, 3)}${unit}${f.rule === 'simple' ? '' : ' on each side'}`],
      ['acceptance interval', `${f.acceptance.lower === null ? '-' : num(f.acceptance.lower, 8)} to ${f.acceptance.upper === null ? '-' : num(f.acceptance.upper, 8)}${unit}`],
      ['value judged, with U', `${num(f.value, 10)}${unit}, U = ${num(f.expandedUncertainty, 3)}${unit}`],
      ['outcome', f.verdict === null ? `no verdict${f.note ? ` (${f.note})` : ''}` : VERDICT_TEXT[f.verdict] ?? f.verdict],
      ['conformance probability p_c (JCGM 106:2012, clause 7)', f.probability === null ? '-' : num(f.probability, 4)],
    ];
    html += `<h3>Conformity</h3><table>${rows(table)}</table>
<p class="note">The statement of conformity is informative: it follows the decision rule stated above and defers to the laboratory's own procedure, its agreement with the customer and its accreditation.</p>`;
  }
  return html;
}

/** The notes not already shown with the Monte Carlo and bootstrap checks (a record repeats theirs in notes). */
function otherNotes(d: DerivedReportEntry | DerivedView): string[] {
  const shown = new Set<string>();
  if ('monteCarlo' in d && d.monteCarlo) shown.add('error' in d.monteCarlo ? d.monteCarlo.error : d.monteCarlo.note);
  if ('bootstrap' in d && d.bootstrap) shown.add(d.bootstrap.note);
  return d.notes.filter((note) => !shown.has(note));
}

const DERIVED_ESTIMATOR_TEXT: Record<string, string> = {
  'batch-means': 'multivariate batch means over common time buckets (D. Vats, J. M. Flegal and G. L. Jones 2019, Biometrika 106(2), 321-337)',
  iid: 'rows taken as independent: the sample covariance of the rows over their number (JCGM 100:2008, 5.2.3)',
};

function percentText(share: number | null | undefined): string {
  if (share === null || share === undefined || !Number.isFinite(share)) return '-';
  return `${num(share * 100, 3)} %`;
}

/** In words: what the covariance terms do to u_c, against the uncorrelated interval. */
function covarianceText(d: DerivedReportEntry | DerivedView): string {
  if (d.covarianceShare === null || d.standardUncertainty === null) return 'No budget: the combined standard uncertainty is zero or not known yet.';
  const share = d.covarianceShare;
  const unit = d.unit ? ` ${unitLabel(d.unit)}` : '';
  const against = d.independent ? ` As if the inputs were uncorrelated, u_c would be ${num(d.independent.standardUncertainty, 3)}${unit} instead of ${num(d.standardUncertainty, 3)}${unit}.` : '';
  if (Math.abs(share) < 0.01) return `The covariance terms are negligible (${percentText(share)} of u_c²).${against}`;
  return share < 0
    ? `The covariance terms sum to ${percentText(share)} of u_c²: correlated inputs partly cancel, and u_c is smaller than the variance terms alone would give.${against}`
    : `The covariance terms add ${percentText(share)} of u_c²: correlated inputs reinforce each other.${against}`;
}

/** The budget as bars in % of u_c^2: variances, covariance terms (negative ones left of zero) and the total. */
function budgetChart(d: DerivedReportEntry | DerivedView): string {
  const u = d.standardUncertainty;
  if (u === null || !(u > 0)) return '';
  const u2 = u * u;
  const bars: SvgBar[] = [];
  for (const b of d.budget) {
    if (b.varianceShare === null) continue;
    bars.push({ label: b.channel, value: 100 * b.varianceShare, fill: '#2f6b8a', valueLabel: `${num(100 * b.varianceShare, 3)} %`, detail: `${b.channel}: c = ${num(b.sensitivity, 4)}, u(x) = ${num(b.standardUncertainty, 3)}, c u(x) = ${num(b.contribution, 3)}` });
  }
  for (const c of d.covarianceTerms) {
    const value = (100 * c.term) / u2;
    bars.push({ label: `${c.channels[0]} × ${c.channels[1]}`, value, fill: value < 0 ? '#f3c9c4' : '#f1dcb4', stroke: value < 0 ? '#b3261e' : '#9a5b00', dash: '3 2', valueLabel: `${value > 0 ? '+' : ''}${num(value, 3)} %`, detail: `covariance term 2 c_i c_j u(x_i, x_j) = ${num(c.term, 3)}; r = ${num(c.correlation, 3)}` });
  }
  bars.push({ label: 'u_c² (the sum)', value: 100, fill: '#5b6573', valueLabel: '100 %' });
  return svgBarChart({
    width: 760,
    title: `Uncertainty budget of ${d.name}`,
    xLabel: 'share of u_c² (%)',
    bars,
    legend: [
      { label: 'input variance c_i² u²(x_i)', fill: '#2f6b8a' },
      { label: 'covariance term, positive', fill: '#f1dcb4', stroke: '#9a5b00', dash: '3 2' },
      { label: 'covariance term, negative (reduces u_c)', fill: '#f3c9c4', stroke: '#b3261e', dash: '3 2' },
    ],
  });
}

function monteCarloBlock(entry: DerivedReportEntry, unit: string): string {
  const mc = entry.monteCarlo;
  if (mc === null || mc === undefined) return '<h3>Monte Carlo check (JCGM 101:2008)</h3><p class="note">Not run (no uncertainty to check).</p>';
  if ('error' in mc) return `<h3>Monte Carlo check (JCGM 101:2008)</h3><p class="note">${escapeHtml(mc.error)}</p>`;
  const pairs: [string, string][] = [
    ['trials', `${mc.trials}${mc.converged === false ? ' (stopped at the cap before the adaptive rule was satisfied)' : mc.converged ? ' (adaptive rule satisfied)' : ''}`],
    ['estimate and standard uncertainty', `${num(mc.value, 10)}${unit}, u = ${num(mc.standardUncertainty, 3)}${unit}`],
    [`probabilistically symmetric ${num(mc.confidence * 100, 4)} % interval`, `[${num(mc.low, 8)}, ${num(mc.high, 8)}]${unit}`],
    ['shortest interval', `[${num(mc.shortestLow, 8)}, ${num(mc.shortestHigh, 8)}]${unit}`],
    [`validation of the first-order result (clause 8, ${mc.significantDigits} significant digits)`, mc.validated === null ? 'not applicable' : `${mc.validated ? 'validated' : 'not validated'}: the ends differ by ${num(mc.lowDifference, 3)} and ${num(mc.highDifference, 3)} against the tolerance ${num(mc.tolerance, 3)}`],
  ];
  return `<h3>Monte Carlo check (JCGM 101:2008)</h3><table>${rows(pairs)}</table><p class="note">${escapeHtml(mc.note)}</p>`;
}

function bootstrapBlock(entry: DerivedReportEntry, unit: string): string {
  const b = entry.bootstrap;
  if (b === null || b === undefined) return '<h3>Bootstrap check</h3><p class="note">Not run (no uncertainty to check).</p>';
  const pairs: [string, string][] = [
    ['series', `the linearised series sum c_i x_i over ${b.values} values${b.aggregation > 1 ? ` (means of ${b.aggregation} rows)` : ''}`],
    ['stationary bootstrap', `${b.replicates} replicates, mean block length ${num(b.blockLength, 3)}`],
    ['standard error of the mean', b.mean ? `${num(b.mean.standardError, 3)}${unit} against u_c = ${num(b.analyticStandardUncertainty, 3)}${unit}${b.comparison && b.comparison.ratio !== null ? ` (ratio ${num(b.comparison.ratio, 3)})` : ''}` : '-'],
    ['agreement', b.agrees === null ? 'nothing to compare' : b.agrees ? 'agrees' : 'does not agree'],
  ];
  return `<h3>Bootstrap check</h3><table>${rows(pairs)}</table><p class="note">${escapeHtml(b.note)}</p>`;
}

function rows(pairs: [string, string][]): string {
  return pairs.map(([k, v]) => `<tr><th>${escapeHtml(k)}</th><td>${escapeHtml(v)}</td></tr>`).join('');
}

function num(value: number | null | undefined, digits: number): string {
  if (value === null || value === undefined || !Number.isFinite(value)) return '-';
  if (value !== 0 && (Math.abs(value) >= 1e7 || Math.abs(value) < 1e-4)) return value.toExponential(digits - 1);
  return Number(value.toPrecision(digits)).toString();
}

function iso(ms: number): string {
  return new Date(ms).toISOString();
}

function isoSeconds(seconds: number | null): string | null {
  return seconds === null || !Number.isFinite(seconds) ? null : new Date(seconds * 1000).toISOString();
}

/** The trace with the mean and U band, the excluded samples shaded, against seconds (or sample index). */
function traceChart(channel: ReportChannel): string {
  const { trace, snapshot: s } = channel;
  if (trace === null || trace.values.length < 2) return '';
  // Seconds on the x axis when every sample has a time and they never go back (late samples can).
  const timed = trace.times.every((t, i) => t !== null && (i === 0 || t >= (trace.times[i - 1] as number)));
  const first = trace.indices[0] as number;
  const zeroAt = trace.originIndex >= first ? trace.originIndex : first;
  // The position of sample index `index` among the points kept (the nearest kept point at or after it).
  const pointAt = (index: number) => {
    let lo = 0;
    let hi = trace.indices.length - 1;
    while (lo < hi) {
      const mid = (lo + hi) >> 1;
      if ((trace.indices[mid] as number) < index) lo = mid + 1;
      else hi = mid;
    }
    return lo;
  };
  const t0 = timed ? (trace.times[pointAt(zeroAt)] as number) : 0;
  const xAt = (index: number) => (timed ? (trace.times[pointAt(index)] as number) - t0 : index);
  const x = trace.indices.map((index, i) => (timed ? (trace.times[i] as number) - t0 : index));
  const firstWindow = trace.windowStartIndex;
  const windowX = x.slice(firstWindow > first ? pointAt(firstWindow) : 0);
  const spans = firstWindow > first ? [{ from: x[0] as number, to: xAt(firstWindow), fill: '#f3d9a6', label: 'excluded' }] : [];
  const bands = s.mean !== null && s.expandedUncertainty !== null && windowX.length > 1
    ? [{ x: [windowX[0] as number, windowX.at(-1) as number], low: [s.mean - s.expandedUncertainty, s.mean - s.expandedUncertainty], high: [s.mean + s.expandedUncertainty, s.mean + s.expandedUncertainty], fill: '#2f6b8a', opacity: 0.22 }]
    : [];
  const series = [{ x, y: trace.values, stroke: '#5b6573', width: 0.8 }];
  if (s.mean !== null && windowX.length > 1) series.push({ x: [windowX[0] as number, windowX.at(-1) as number], y: [s.mean, s.mean], stroke: '#2f6b8a', width: 1.4 });
  const vlines = firstWindow > first ? [{ x: xAt(firstWindow), label: 'warm-up cut', stroke: '#9a5b00' }] : [];
  return svgChart({
    width: 620,
    height: 210,
    title: `Samples, mean and expanded uncertainty U${s.mean !== null ? '' : ' (no mean yet)'}`,
    xLabel: timed ? (trace.originIndex >= first ? 'seconds since the test point started' : 'seconds since the first sample shown') : 'sample index',
    yLabel: channel.unit === null ? 'value' : unitLabel(channel.unit),
    series,
    bands,
    spans,
    vlines,
  });
}

function acfChart(s: ChannelSnapshot): string {
  if (s.acf.length < 2) return '';
  const lags = s.acf.map((_, i) => i + 1);
  const used = s.estimator === 'beran' ? undefined : s.estimators[s.estimator];
  const noise = 2 / Math.sqrt(Math.max(1, s.n));
  return svgChart({
    width: 300,
    height: 210,
    title: `Autocorrelation (tau_int = ${num(s.tauInt, 3)})`,
    xLabel: 'lag (samples)',
    yLabel: 'autocorrelation',
    series: [{ x: lags, y: s.acf, stroke: '#2f6b8a', width: 1.3 }],
    hlines: [
      { y: 0, stroke: '#5b6573' },
      { y: noise, stroke: '#8a95a3', dash: '3 3', label: '±2/√n' },
      { y: -noise, stroke: '#8a95a3', dash: '3 3' },
    ],
    vlines: used && used.window > 0 && used.window <= s.acf.length ? [{ x: used.window, label: `window M = ${used.window}`, stroke: '#9a5b00' }] : [],
    yInclude: [1, -0.2],
  });
}

function allanChart(s: ChannelSnapshot): string {
  const points = s.allan.filter((p) => p.adev > 0);
  if (points.length < 2) return '';
  const timed = points.every((p) => p.tauSeconds !== null && p.tauSeconds > 0);
  const x = points.map((p) => (timed ? (p.tauSeconds as number) : p.m));
  const first = points[0] as (typeof points)[number];
  const reference = x.map((v) => first.adev * Math.sqrt((x[0] as number) / v));
  const limit = s.averagingLimit ? (timed && s.averagingLimit.tauSeconds !== null ? s.averagingLimit.tauSeconds : s.averagingLimit.m) : null;
  return svgChart({
    width: 300,
    height: 210,
    title: 'Allan deviation',
    xLabel: timed ? 'averaging time (s)' : 'averaging factor m',
    yLabel: 'Allan deviation',
    xLog: true,
    yLog: true,
    series: [
      { x, y: reference, stroke: '#8a95a3', width: 1, dash: '3 3', label: 'white noise slope' },
      { x, y: points.map((p) => p.adev), stroke: '#2f6b8a', width: 1.4 },
      { x, y: points.map((p) => p.adev), stroke: '#2f6b8a', dots: true },
    ],
    errorBars: points.flatMap((p, i) => (p.low > 0 && p.high > 0 ? [{ x: x[i] as number, low: p.low, high: p.high, stroke: '#2f6b8a' }] : [])),
    vlines: limit !== null ? [{ x: limit, label: 'averaging limit', stroke: '#b3261e' }] : [],
  });
}

function cusumChart(cusum: ReportChannel['cusum']): string {
  if (!cusum || cusum.upper.length < 2) return '';
  const x = cusum.upper.map((_, i) => i + 1);
  return svgChart({
    width: 300,
    height: 210,
    title: 'CUSUM on block means',
    xLabel: `block (${cusum.blockSize} samples each)`,
    yLabel: 'sum (standard deviations)',
    series: [
      { x, y: cusum.upper, stroke: '#2f6b8a', width: 1.2, label: 'upward' },
      { x, y: cusum.lower.map((v) => -v), stroke: '#9a5b00', width: 1.2, label: 'downward' },
    ],
    hlines: [
      { y: cusum.decisionInterval, stroke: '#b3261e', dash: '4 3', label: 'h' },
      { y: -cusum.decisionInterval, stroke: '#b3261e', dash: '4 3' },
      { y: 0, stroke: '#5b6573' },
    ],
  });
}
