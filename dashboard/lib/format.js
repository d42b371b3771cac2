// Numbers, times and words for the screen. A measured value is shown with the decimals its
// expanded uncertainty supports (two significant digits of U, common practice for stating results).

const THIN_SPACE = '\u2009';

/** Decimals that give U two significant digits (null when U is unknown). */
export function decimalsFor(uncertainty) {
  if (!(uncertainty > 0) || !Number.isFinite(uncertainty)) return null;
  return Math.max(0, Math.min(12, 1 - Math.floor(Math.log10(uncertainty))));
}

/** A value with the given decimals, or 7 significant digits without them. */
export function formatValue(value, decimals) {
  if (value === null || value === undefined || !Number.isFinite(value)) return '–';
  if (decimals === null || decimals === undefined) return trimNumber(value, 7);
  if (Math.abs(value) >= 1e12) return value.toExponential(6);
  return value.toFixed(decimals);
}

/** The expanded uncertainty rounded to two significant digits. */
export function formatUncertainty(uncertainty) {
  if (!(uncertainty >= 0) || !Number.isFinite(uncertainty)) return '–';
  if (uncertainty === 0) return '0';
  const decimals = decimalsFor(uncertainty);
  if (decimals > 0) return uncertainty.toFixed(decimals);
  return String(Number(uncertainty.toPrecision(2)));
}

/** "value ± U" with the value to the decimals of U, the value alone while there is no U, '–' without a value; `unit` (" K") follows. */
export function formatResult(value, expandedUncertainty, unit = '') {
  if (value === null || value === undefined) return '–';
  if (expandedUncertainty === null || expandedUncertainty === undefined) return `${formatValue(value, null)}${unit}`;
  return `${formatValue(value, decimalsFor(expandedUncertainty))} ± ${formatUncertainty(expandedUncertainty)}${unit}`;
}

/** Up to `digits` significant digits, no trailing zeros, exponent only for extreme magnitudes. */
export function trimNumber(value, digits = 4) {
  if (value === null || value === undefined || !Number.isFinite(value)) return '–';
  if (value !== 0 && (Math.abs(value) >= 1e9 || Math.abs(value) < 1e-5)) return value.toExponential(Math.max(0, digits - 2));
  return String(Number(value.toPrecision(digits)));
}

/** Integers with thin-space thousands groups. */
export function formatCount(value) {
  if (value === null || value === undefined || !Number.isFinite(value)) return '–';
  const text = String(Math.round(value));
  return text.replace(/\B(?=(\d{3})+(?!\d))/g, THIN_SPACE);
}

export function formatEffective(value) {
  if (value === null || value === undefined || !Number.isFinite(value)) return '–';
  return value >= 100 ? formatCount(value) : trimNumber(value, 3);
}

/** A duration in words: "45 s", "3 min 20 s", "2 h 05 min", "3.2 days". */
export function formatDuration(seconds) {
  if (seconds === null || seconds === undefined || !Number.isFinite(seconds)) return '–';
  if (seconds < 1) return '< 1 s';
  if (seconds < 60) return `${Math.round(seconds)} s`;
  if (seconds < 3600) {
    const minutes = Math.floor(seconds / 60);
    const rest = Math.round(seconds - minutes * 60);
    return rest > 0 && minutes < 10 ? `${minutes} min ${rest} s` : `${Math.round(seconds / 60)} min`;
  }
  if (seconds < 86400) {
    const hours = Math.floor(seconds / 3600);
    const minutes = Math.round((seconds - hours * 3600) / 60);
    return `${hours} h ${String(minutes).padStart(2, '0')} min`;
  }
  return `${(seconds / 86400).toPrecision(2)} days`;
}

export function clockTime(ms) {
  const date = new Date(ms);
  return `${pad(date.getHours())}:${pad(date.getMinutes())}:${pad(date.getSeconds())}`;
}

export function dateTime(ms) {
  const date = new Date(ms);
  return `${date.getFullYear()}-${pad(date.getMonth() + 1)}-${pad(date.getDate())} ${clockTime(ms)}`;
}

function pad(n) {
  return String(n).padStart(2, '0');
}

export function percent(confidence) {
  return `${trimNumber(confidence * 100, 4)} %`;
}

/**
 * The state vocabulary of the sheet: one name per state, the API's own (warming, steady, precise,
 * unsteady, stale), each with a text glyph whose shape says it without colour (↗ still moving,
 * ≈ level and averaging, ✓ level and at its target, ≠ no longer level, ∅ silent), a line of
 * explanation and a class that sets its colour and the rule drawn at the left of its entry.
 */
export const STATES = {
  warming: { label: 'WARMING', symbol: '↗', hint: 'still moving towards its level: the mean is not a result yet', className: 'st-warming' },
  steady: { label: 'STEADY', symbol: '≈', hint: 'level: averaging towards the target uncertainty', className: 'st-steady' },
  precise: { label: 'PRECISE', symbol: '✓', hint: 'level, and its expanded uncertainty within the target', className: 'st-precise' },
  unsteady: { label: 'UNSTEADY', symbol: '≠', hint: 'a shift, trend or variance change was found: averaging starts again after it', className: 'st-unsteady' },
  stale: { label: 'STALE', symbol: '∅', hint: 'no sample for longer than its staleSeconds: the figures are those of the last sample', className: 'st-stale' },
};

export function stateOf(name) {
  return STATES[name] ?? { label: String(name).toUpperCase(), symbol: '?', hint: '', className: 'st-unknown' };
}

/**
 * The state of a derived result, in words: no value yet, waiting for its inputs (an input channel
 * is not steady, so the value is provisional), not yet at target, at target, or steady inputs and
 * no target. Read from the daemon's verdict (atTarget, inputStates).
 */
export const DERIVED_STATES = {
  'no-value': { label: 'NO VALUE YET', symbol: '∅', hint: 'too few common rows of its inputs', className: 'st-stale' },
  waiting: { label: 'WAITING FOR INPUTS', symbol: '↗', hint: 'an input channel is not steady: the value is provisional', className: 'st-warming' },
  short: { label: 'STEADY', symbol: '≈', hint: 'inputs steady; the uncertainty is still above the target', className: 'st-steady' },
  'no-target': { label: 'STEADY', symbol: '≈', hint: 'inputs steady; no target is set', className: 'st-steady' },
  'at-target': { label: 'PRECISE', symbol: '✓', hint: 'inputs steady and the uncertainty within the target', className: 'st-precise' },
};

const STEADY_INPUT = new Set(['steady', 'precise']);

/** The key of DERIVED_STATES for a derived result; an input with a break or no data turns the colour to alert. */
export function derivedStateOf(d) {
  const inputs = Object.values(d.inputStates ?? {});
  const base = (key) => ({ key, ...DERIVED_STATES[key] });
  if (!d.ready || d.value === null || d.value === undefined) return base('no-value');
  if (d.atTarget === true) return base('at-target');
  if (!inputs.every((s) => STEADY_INPUT.has(s))) {
    const state = base('waiting');
    if (inputs.some((s) => s === 'unsteady' || s === 'stale' || s === 'no data')) state.className = 'st-unsteady';
    return state;
  }
  return base(d.target ? 'short' : 'no-target');
}

/** A share (fraction) as a signed percentage: "+12.3 %", "−250 %". */
export function signedPercent(share) {
  if (share === null || share === undefined || !Number.isFinite(share)) return '–';
  const value = share * 100;
  const text = trimNumber(Math.abs(value), 3);
  return `${value < 0 ? '−' : value > 0 ? '+' : ''}${text} %`;
}

export const POINT_STATES = {
  running: { label: 'RUNNING', symbol: '→', className: 'st-steady' },
  ready: { label: 'READY', symbol: '✓', className: 'st-precise' },
  stopped: { label: 'STOPPED', symbol: '□', className: 'st-stale' },
};

/** Event kinds in words, with a severity: alert, notice, good or info. */
const EVENT_TEXT = {
  steady: ['good', 'Steady: warm-up over'],
  'precision-reached': ['good', 'Precise: target uncertainty met'],
  'stationarity-lost': ['alert', 'Unsteady: steady state lost'],
  'stationarity-regained': ['good', 'Steady again'],
  'break-revised': ['notice', 'Break classified again'],
  'warmup-extended': ['notice', 'Warm-up longer than it looked: start moved'],
  'steady-withdrawn': ['alert', 'Steady state withdrawn: warm-up not over'],
  'averaging-limit': ['notice', 'Averaging limit: longer runs no longer help'],
  'conformity-changed': ['notice', 'Conformity outcome changed'],
  stale: ['alert', 'Channel stale: no samples'],
  fresh: ['info', 'Data flowing again'],
  'criterion-holds': ['good', 'Stability rule holds'],
  'criterion-lost': ['notice', 'Stability rule no longer holds'],
  'test-point-started': ['info', 'Test point started'],
  'test-point-ready': ['good', 'Test point ready'],
  'test-point-stopped': ['info', 'Test point stopped'],
  'test-point-annotated': ['info', 'Note added'],
  'broker-connected': ['info', 'Broker connected'],
  'broker-disconnected': ['alert', 'Broker connection lost'],
  'broker-session-lost': ['alert', 'Broker lost the session: messages may be missing'],
  'ingest-lag': ['alert', 'Daemon falling behind'],
  'command-refused': ['alert', 'Command refused'],
  'store-recovered': ['alert', 'Samples could not be stored for a while'],
  'alert-acknowledged': ['info', 'Alert acknowledged'],
  gap: ['notice', 'Gap: samples missing'],
};

/** An event in words; `unit` is the unit of its source (a channel's), printed after its numbers. */
export function describeEvent(event, unit = null) {
  const [severity, title] = EVENT_TEXT[event.kind] ?? ['info', event.kind];
  return { severity, title, detail: eventDetail(event, unitSuffix(event.body?.unit ?? unit)) };
}

export const SEVERITY = {
  alert: { label: 'ALERT', symbol: '!' },
  notice: { label: 'NOTE', symbol: '※' },
  good: { label: 'OK', symbol: '✓' },
  info: { label: 'INFO', symbol: '·' },
};

function eventDetail(event, unit) {
  const body = event.body ?? {};
  switch (event.kind) {
    case 'stationarity-lost':
      return `${body.cause ?? 'change'} from sample ${body.changePoint ?? '?'}${body.detail ? `: ${body.detail}` : ''}`;
    case 'steady':
    case 'stationarity-regained':
    case 'warmup-extended':
      return `from sample ${body.warmupEnd ?? '?'}; ${formatCount(body.excluded ?? 0)} samples excluded`;
    case 'break-revised':
      return `${body.cause ?? 'change'} from sample ${body.changePoint ?? '?'}${body.slope ? `, slope ${trimNumber(body.slope.perSample, 2)} ± ${trimNumber(body.slope.standardUncertainty, 2)}${unit} per sample` : ''}${body.warmup ? ' (the warm-up still running)' : ''}`;
    case 'steady-withdrawn':
      return `${body.reason ?? ''}`;
    case 'precision-reached':
      return `${body.derived ? `${trimNumber(body.value, 6)}${unit}, ` : ''}U = ${trimNumber(body.expandedUncertainty, 3)}${unit} within ${trimNumber(body.bound, 3)}${unit}`;
    case 'averaging-limit':
      return `beyond m = ${body.m}${body.tauSeconds ? ` (${formatDuration(body.tauSeconds)})` : ''} the Allan deviation stops falling${body.adev ? ` (${trimNumber(body.adev, 3)}${unit})` : ''}`;
    case 'conformity-changed':
      return `${body.previous ?? 'none'} → ${body.verdict ?? '?'} (${body.rule ?? ''} rule${typeof body.probability === 'number' ? `, p_c ${trimNumber(body.probability, 3)}` : ''})`;
    case 'stale':
      return `silent for ${formatDuration(body.silentSeconds)}`;
    case 'criterion-holds':
      return `${body.rule ?? ''}: ${trimNumber(body.value, 3)} against the tolerance ${trimNumber(body.tolerance, 3)}`;
    case 'criterion-lost':
      return `${body.rule ?? ''}: ${body.reason ?? ''}`;
    case 'test-point-started':
    case 'test-point-ready':
    case 'test-point-stopped':
      return `${body.name ?? body.testPoint ?? ''}`;
    case 'test-point-annotated':
      return `${body.text ?? ''}`;
    case 'broker-connected':
    case 'broker-disconnected':
    case 'broker-session-lost':
      return `${body.detail ?? ''}`;
    case 'ingest-lag':
    case 'gap':
      return `${body.detail ?? ''}`;
    case 'command-refused':
      return `${body.command ?? ''}: ${body.reason ?? ''}`;
    case 'store-recovered':
      return `commits failed for ${formatDuration((body.failedMs ?? 0) / 1000)} (${body.error?.code ?? 'error'}), ${formatCount(body.failedAttempts ?? 0)} attempts; nothing was lost`;
    default:
      return '';
  }
}

/**
 * Units as people write them: the same table as src/engine/unit-label.ts (SenML codes, RFC 8428
 * 12.1, and ASCII spellings, printed as the SI Brochure writes them); a test checks that the two agree.
 */
export const UNIT_LABELS = {
  Cel: '°C',
  degC: '°C',
  deg_C: '°C',
  celsius: '°C',
  degF: '°F',
  deg_F: '°F',
  K: 'K',
  kelvin: 'K',
  Ohm: 'Ω',
  ohm: 'Ω',
  kOhm: 'kΩ',
  MOhm: 'MΩ',
  uV: 'µV',
  uA: 'µA',
  um: 'µm',
  us: 'µs',
  '%RH': '% RH',
  '/': '1',
  '/s': 's⁻¹',
  '/min': 'min⁻¹',
  '/h': 'h⁻¹',
  deg: '°',
  m2: 'm²',
  m3: 'm³',
  'm/s2': 'm/s²',
  'm3/s': 'm³/s',
  'm3/h': 'm³/h',
  'kg/m3': 'kg/m³',
  'W/m2': 'W/m²',
  'J/(kg K)': 'J/(kg·K)',
  'kJ/(kg K)': 'kJ/(kg·K)',
  'l/min': 'L/min',
  'l/h': 'L/h',
  l: 'L',
};

/** A unit code as printed (°C for Cel or degC; exponents raised); '' without one. */
export function unitText(unit) {
  if (unit === null || unit === undefined || unit === '') return '';
  const known = Object.prototype.hasOwnProperty.call(UNIT_LABELS, unit) ? UNIT_LABELS[unit] : undefined;
  if (known !== undefined) return known;
  return String(unit).replace(/([A-Za-z])(-?[23])(?![0-9])/g, (_m, letter, power) => `${letter}${power.replace('-', '⁻').replace('2', '²').replace('3', '³')}`);
}

/** " °C" (with the leading space) or ''. */
export function unitSuffix(unit) {
  const text = unitText(unit);
  return text ? ` ${text}` : '';
}

/**
 * The progress towards a target on a scale a person reads: the samples taken against the samples
 * the window needs in all (from the 1/√n law), as "1 200 of 3 400 samples"; null while it cannot
 * be said (no target, not steady, unknown).
 */
export function samplesProgress(n, target) {
  if (!target || target.reached || !(target.samplesNeeded > 0) || !(n >= 0)) return null;
  const fraction = Math.max(0, Math.min(1, n / target.samplesNeeded));
  return { fraction, text: `${formatCount(n)} of ${formatCount(target.samplesNeeded)} samples needed` };
}

/** The coverage statement that goes with U: "k = 2.03, ≈95 %". */
export function coverageText(coverageFactor, confidence) {
  return `k = ${trimNumber(coverageFactor, 3)}, ≈${trimNumber(confidence * 100, 4)} %`;
}
