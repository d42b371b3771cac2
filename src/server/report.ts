import type { TestPoint } from '../engine/test-points.js';
import type { TestPointRecord } from '../engine/test-point-record.js';
import { RECORD_CAUTION } from '../engine/test-point-record.js';
import type { ChannelSnapshot } from '../engine/channel-pipeline.js';
import { escapeHtml } from './html-text.js';

/**
 * The printable test-point report (HTML, for print to PDF): per channel the result in GUM wording,
 * the estimator, the steady-state evidence and charts drawn as inline SVG (no script, no external
 * asset), and the cautions. Every text from the network is escaped.
 */
export interface ReportInput {
  point: TestPoint;
  record: TestPointRecord | null;
  channels: { name: string; unit: string | null; snapshot: ChannelSnapshot; trace: { times: (number | null)[]; values: number[] } }[];
}

export function renderReport(input: ReportInput): string {
  const { point, record } = input;
  const sections = input.channels.map((channel) => channelSection(channel, record));
  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8"><title>Test point ${escapeHtml(point.name)}</title>
<style>
body{font:13px/1.45 system-ui,sans-serif;color:#1d2430;max-width:60rem;margin:2rem auto;padding:0 1rem}
h1{font-size:1.4rem;margin:0 0 .2rem}h2{font-size:1.1rem;margin:1.6rem 0 .4rem;border-bottom:1px solid #c9d1dc}
table{border-collapse:collapse;margin:.4rem 0}td,th{padding:.15rem .6rem;text-align:left;border-bottom:1px solid #e4e8ee;font-variant-numeric:tabular-nums}
.statement{background:#f3f6f9;padding:.6rem .8rem;border-left:3px solid #3a6d8c}
.caution{margin-top:2rem;padding:.6rem .8rem;border:1px solid #b5651d;background:#fff7ef}
svg{display:block;margin:.3rem 0}
@media print{body{margin:0}h2{break-after:avoid}section{break-inside:avoid}}
</style></head><body>
<h1>Test point ${escapeHtml(point.name)}</h1>
<p>Identifier ${escapeHtml(point.id)} · state ${escapeHtml(point.state)} · started ${escapeHtml(new Date(point.createdMs).toISOString())}${point.readyMs ? ` · ready ${escapeHtml(new Date(point.readyMs).toISOString())}` : ''}${point.stoppedMs ? ` · stopped ${escapeHtml(new Date(point.stoppedMs).toISOString())}` : ''}</p>
<p>${record ? `Record written ${escapeHtml(record.createdAt)} (${escapeHtml(record.kind)}).` : 'No record yet: values below are the current ones.'}</p>
${point.annotations.length ? `<h2>Notes</h2><ul>${point.annotations.map((a) => `<li>${escapeHtml(new Date(a.timeMs).toISOString())}: ${escapeHtml(a.text)}</li>`).join('')}</ul>` : ''}
${sections.join('\n')}
<p class="caution"><strong>Caution.</strong> ${escapeHtml(RECORD_CAUTION)}</p>
</body></html>`;
}

function channelSection(channel: ReportInput['channels'][number], record: TestPointRecord | null): string {
  const entry = record?.entries.find((e) => e.channel === channel.name);
  const s = channel.snapshot;
  const statement = entry?.statement ?? '';
  const tests = s.stationarity?.tests;
  const rows: [string, string][] = [
    ['estimator of tau_int', s.estimator],
    ['samples n (excluded as warm-up)', `${s.n} (${s.excluded})`],
    ['tau_int, n_eff', `${fmt(s.tauInt)} samples, ${fmt(s.nEff)}`],
    ['steady from sample', s.stationarity?.warmupEnd === null || s.stationarity === null ? 'not steady' : String(s.stationarity.warmupEnd)],
    ['Heidelberger-Welch', tests?.heidelbergerWelch ? `${tests.heidelbergerWelch.passed ? 'passed' : 'failed'} (p = ${fmt(tests.heidelbergerWelch.pValue)})` : '-'],
    ['Geweke z', tests?.geweke ? fmt(tests.geweke.statistic) : '-'],
    ['KPSS (block means)', tests?.kpss ? `${fmt(tests.kpss.statistic)} (${tests.kpss.passed ? 'stationary' : 'rejected'} at 5 %)` : '-'],
    ['averaging limit', s.averagingLimit ? `m = ${s.averagingLimit.m}` : 'none found'],
  ];
  return `<section><h2>${escapeHtml(channel.name)}${channel.unit ? ` / ${escapeHtml(channel.unit)}` : ''}</h2>
<p class="statement">${escapeHtml(statement || 'no record for this channel yet')}</p>
<table>${rows.map(([k, v]) => `<tr><th>${escapeHtml(k)}</th><td>${escapeHtml(v)}</td></tr>`).join('')}</table>
${traceSvg(channel.trace.values, s.mean, s.expandedUncertainty)}
${allanSvg(s.allan)}
</section>`;
}

function fmt(value: number | null | undefined): string {
  if (value === null || value === undefined || !Number.isFinite(value)) return '-';
  return Number(value.toPrecision(4)).toString();
}

/** The trace with the mean and its expanded-uncertainty band. */
function traceSvg(values: number[], mean: number | null, expanded: number | null): string {
  if (values.length < 2) return '';
  const width = 640;
  const height = 160;
  let low = Math.min(...values);
  let high = Math.max(...values);
  if (high === low) high = low + 1;
  const pad = (high - low) * 0.05;
  low -= pad;
  high += pad;
  const x = (i: number) => ((i / (values.length - 1)) * (width - 2) + 1).toFixed(1);
  const y = (v: number) => (height - 1 - ((v - low) / (high - low)) * (height - 2)).toFixed(1);
  const path = values.map((v, i) => `${i === 0 ? 'M' : 'L'}${x(i)},${y(v)}`).join('');
  const band = mean !== null && expanded !== null ? `<rect x="0" y="${y(mean + expanded)}" width="${width}" height="${Math.max(1, Number(y(mean - expanded)) - Number(y(mean + expanded))).toFixed(1)}" fill="#3a6d8c" opacity="0.18"/><line x1="0" x2="${width}" y1="${y(mean)}" y2="${y(mean)}" stroke="#3a6d8c" stroke-width="1.2"/>` : '';
  return `<svg width="${width}" height="${height}" viewBox="0 0 ${width} ${height}" role="img" aria-label="recent samples with the mean and its expanded uncertainty"><rect width="${width}" height="${height}" fill="#fbfcfd" stroke="#c9d1dc"/>${band}<path d="${path}" fill="none" stroke="#4b5563" stroke-width="0.8"/></svg>`;
}

/** The Allan deviation on log-log axes. */
function allanSvg(points: ChannelSnapshot['allan']): string {
  const usable = points.filter((p) => p.adev > 0);
  if (usable.length < 2) return '';
  const width = 320;
  const height = 160;
  const lx = usable.map((p) => Math.log10(p.m));
  const ly = usable.map((p) => Math.log10(p.adev));
  const [x0, x1] = [Math.min(...lx), Math.max(...lx)];
  let [y0, y1] = [Math.min(...ly), Math.max(...ly)];
  if (y1 === y0) y1 = y0 + 1;
  y0 -= 0.1;
  y1 += 0.1;
  const px = (v: number) => (((v - x0) / (x1 - x0 || 1)) * (width - 20) + 10).toFixed(1);
  const py = (v: number) => (height - 10 - ((v - y0) / (y1 - y0)) * (height - 20)).toFixed(1);
  const path = lx.map((v, i) => `${i === 0 ? 'M' : 'L'}${px(v)},${py(ly[i] as number)}`).join('');
  const dots = lx.map((v, i) => `<circle cx="${px(v)}" cy="${py(ly[i] as number)}" r="2.2" fill="#3a6d8c"/>`).join('');
  return `<svg width="${width}" height="${height}" viewBox="0 0 ${width} ${height}" role="img" aria-label="Allan deviation against averaging factor, log-log"><rect width="${width}" height="${height}" fill="#fbfcfd" stroke="#c9d1dc"/><path d="${path}" fill="none" stroke="#3a6d8c"/>${dots}</svg>`;
}
