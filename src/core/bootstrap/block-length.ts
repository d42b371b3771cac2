import normalQuantile from '@stdlib/stats-base-dists-normal-quantile';
import { AutocovarianceFft } from '../acf/autocovariance-fft.js';

/**
 * Automatic block length for the stationary and circular block bootstraps of a mean.
 *
 * Method: D. N. Politis & H. White (2004), "Automatic block-length selection for the dependent
 * bootstrap", Econometric Reviews 23(1), 53-70, with the correction of A. Patton, D. N. Politis &
 * H. White (2009), "Correction to 'Automatic block-length selection for the dependent bootstrap'
 * by D. Politis and H. White", Econometric Reviews 28(4), 372-375 (citations from the R np docs;
 * page numbers from memory). The formulas and constants are those of `b.star()` in the R package np
 * 0.70-4 (read in its source; DERIVED-REFERENCES.md section 5):
 * - rho(k), R(k): sample autocorrelation and biased autocovariance (divisor n), as R `acf`;
 * - K_n = max(5, ceil(log10 n)), m_max = ceil(sqrt(n)) + K_n, B_max = ceil(min(3 sqrt(n), n / 3)),
 *   c = z_0.975 (Politis & White's footnote c with np's integer K_n; Patton's MATLAB and Python's
 *   arch use c = 2 instead);
 * - mHat: the first m in 1 ... m_max - K_n + 1 such that |rho(m)|, ..., |rho(m + K_n - 1)| are all
 *   below c sqrt(log10(n) / n) (np counts the run from m itself; the paper's wording, "followed by
 *   K_n insignificant lags", would give one less); failing that, the largest significant lag; with
 *   none significant, 1;
 * - bandwidth M = min(2 mHat, m_max); flat-top window lambda(t) = 1 for |t| < 1/2, 2 (1 - |t|) for
 *   1/2 <= |t| <= 1, 0 beyond (D. N. Politis & J. P. Romano (1995), "Bias-corrected nonparametric
 *   spectral estimation", J. Time Series Analysis 16(1), 67-103, from memory);
 * - G = sum_{|k| <= M} lambda(k/M) |k| R(k), g(0) = sum_{|k| <= M} lambda(k/M) R(k);
 * - D_SB = 2 g(0)^2 (the 2009 correction; the 2004 paper had 4 g(0)^2 + (2/pi) integral), and
 *   D_CB = (4/3) g(0)^2;
 * - b = (2 G^2 / D)^(1/3) n^(1/3), capped at B_max, not rounded (np's `round = FALSE`).
 * For an AR(1) with coefficient phi the target is b_SB = (2 phi / (1 - phi^2))^(2/3) n^(1/3) and
 * b_CB = 1.5^(1/3) b_SB.
 * Choices: when m_max exceeds n - 1 (n below about 40) the lags are capped at n - 1 and lags past
 *   the end count as insignificant; a constant series returns 1 with `reliable: false`. The
 *   estimates may fall below 1 (np leaves them so); `stationaryBootstrap` uses max(1, b).
 *
 * Cost: O(n log n) (the autocovariance by FFT, src/core/acf/autocovariance-fft.ts) plus O(m_max);
 * O(n) workspace.
 */
export interface BlockLengthResult {
  /** Expected block length for the stationary bootstrap (Politis & Romano 1994). */
  stationary: number;
  /** Block length for the circular block bootstrap (D. N. Politis & J. P. Romano 1992, from memory). */
  circular: number;
  /** mHat, the lag after which the autocorrelation is judged insignificant. */
  mHat: number;
  /** M = min(2 mHat, m_max), the bandwidth of the flat-top window. */
  bandwidth: number;
  /** The flat-top estimate of the spectral density at zero (the long-run variance), g(0). */
  spectrumAtZero: number;
  reliable: boolean;
  note?: string;
}

const Z975 = normalQuantile(0.975, 0, 1);

/** Flat-top lag window of Politis & Romano (1995). */
export function flatTopWindow(t: number): number {
  const s = Math.abs(t);
  if (s < 0.5) return 1;
  if (s <= 1) return 2 * (1 - s);
  return 0;
}

export function automaticBlockLength(values: ArrayLike<number>): BlockLengthResult {
  const n = values.length;
  if (n < 3) throw new RangeError('automaticBlockLength requires at least 3 values');
  const kn = Math.max(5, Math.ceil(Math.log10(n)));
  const mMax = Math.ceil(Math.sqrt(n)) + kn;
  const bMax = Math.ceil(Math.min(3 * Math.sqrt(n), n / 3));
  const gamma = new AutocovarianceFft().compute(values, Math.min(mMax, n - 1));
  const gamma0 = gamma[0] as number;
  if (!(gamma0 > 0)) {
    return { stationary: 1, circular: 1, mHat: 1, bandwidth: 1, spectrumAtZero: 0, reliable: false, note: 'constant series: no dependence to measure' };
  }
  const critical = Z975 * Math.sqrt(Math.log10(n) / n);
  const lags = gamma.length - 1;
  const insignificant = (k: number) => k > lags || Math.abs((gamma[k] as number) / gamma0) < critical;
  let mHat = -1;
  for (let m = 1; m <= mMax - kn + 1 && mHat < 0; m++) {
    let run = true;
    for (let k = m; k < m + kn && run; k++) run = insignificant(k);
    if (run) mHat = m;
  }
  if (mHat < 0) {
    mHat = 1;
    for (let k = 1; k <= lags; k++) if (Math.abs((gamma[k] as number) / gamma0) > critical) mHat = k;
  }
  const bandwidth = Math.min(2 * mHat, mMax, lags);
  let g = 0;
  let spectrumAtZero = gamma0;
  for (let k = 1; k <= bandwidth; k++) {
    const weight = flatTopWindow(k / bandwidth);
    g += 2 * weight * k * (gamma[k] as number);
    spectrumAtZero += 2 * weight * (gamma[k] as number);
  }
  const notes: string[] = [];
  if (lags < mMax) notes.push(`series too short for m_max = ${mMax} lags: capped at ${lags}`);
  if (spectrumAtZero === 0) {
    return { stationary: 1, circular: 1, mHat, bandwidth, spectrumAtZero, reliable: false, note: [...notes, 'spectral density estimate at zero is 0'].join('; ') };
  }
  const cubeRootN = Math.cbrt(n);
  const stationary = Math.min(Math.cbrt((2 * g * g) / (2 * spectrumAtZero * spectrumAtZero)) * cubeRootN, bMax);
  const circular = Math.min(Math.cbrt((2 * g * g) / ((4 / 3) * spectrumAtZero * spectrumAtZero)) * cubeRootN, bMax);
  if (spectrumAtZero < 0) notes.push('flat-top spectral density estimate at zero is negative');
  const reliable = notes.length === 0;
  return { stationary, circular, mHat, bandwidth, spectrumAtZero, reliable, ...(reliable ? {} : { note: notes.join('; ') }) };
}
