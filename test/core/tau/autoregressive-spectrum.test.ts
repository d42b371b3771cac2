import { describe, expect, it } from 'vitest';
import { autoregressiveSpectrum, autoregressiveSpectrumOfValues, fitAutoregression, blockMeanVariance } from '../../../src/core/tau/autoregressive-spectrum.js';
import { laggedProductSums } from '../../../src/core/acf/direct-autocovariance.js';
import { SeededRandom } from '../../../src/core/random/seeded-random.js';
import { ar2Complex, ar2Coefficients } from '../../../src/sim/signal-families.js';
import { readCodaFixture, readSeries, relativeDifference } from '../stationarity/fixture-series.js';

/** Biased autocovariance about the mean to lag maxLag (what the pipeline maintains). */
function biasedAutocovariance(x: Float64Array, maxLag: number): Float64Array {
  const n = x.length;
  let mean = 0;
  for (const v of x) mean += v;
  mean /= n;
  const centred = x.map((v) => v - mean);
  const gamma = laggedProductSums(centred, maxLag);
  for (let k = 0; k <= maxLag; k++) gamma[k] = (gamma[k] as number) / n;
  return gamma;
}

const fixture = readCodaFixture();

describe('autoregressive spectral density at zero (the auto rule\'s estimator)', () => {
  for (const series of fixture.series) {
    if (series.spectrum0.spectrum === 0) continue; // coda's absolute constant check: not this estimator's case
    it(`S(0) equals R coda 0.19-4 spectrum0.ar on ${series.name} (coda-stationarity.json; same Yule-Walker fit, AIC order, var.pred)`, () => {
      const x = readSeries(series.file);
      const n = x.length;
      const orderMax = Math.floor(10 * Math.log10(n));
      const fit = fitAutoregression(biasedAutocovariance(x, orderMax), n);
      expect(fit?.order).toBe(series.spectrum0.order);
      expect(fit?.maxOrder).toBe(series.spectrum0.orderMax);
      // coda checks for a straight line by a regression on time before its AR fit; on these series it
      // does not fire, and the fit itself is on the demeaned series, as here.
      expect(relativeDifference(fit?.spectrumAtZero as number, series.spectrum0.spectrum)).toBeLessThan(fixture.tolerance.relative);
      const estimate = autoregressiveSpectrumOfValues(x);
      let mean = 0;
      for (const v of x) mean += v;
      mean /= n;
      let squares = 0;
      for (const v of x) squares += (v - mean) ** 2;
      // tau_int * s^2 = S(0): the estimate's variance of the mean is S(0) / n.
      if (orderMax <= 64) expect(relativeDifference(estimate.varianceOfMean * n, series.spectrum0.spectrum)).toBeLessThan(fixture.tolerance.relative);
      expect(relativeDifference(estimate.tauInt, (fit?.spectrumAtZero as number) / (squares / (n - 1)))).toBeLessThan(1e-12);
    });
  }

  it('AR(2) with complex roots: S(0) converges to sigma^2 / (1 - phi1 - phi2)^2 (AR spectral theory), where Geyer\'s initial sequence overstates it', () => {
    // r = 0.9, omega = pi / 8: phi1 = 1.663, phi2 = -0.81; S(0) = 1 / 0.147^2 = 46.3 for unit innovations.
    const [phi1, phi2] = ar2Coefficients(0.9, Math.PI / 8);
    const theory = 1 / (1 - phi1 - phi2) ** 2;
    const n = 400_000;
    const x = ar2Complex(new SeededRandom(12), 0.9, Math.PI / 8, n);
    const gamma = biasedAutocovariance(x, 64);
    const fit = fitAutoregression(gamma, n);
    expect(fit?.order).toBeGreaterThanOrEqual(2);
    // Standard error of ln S(0) by the delta method (the estimator's own nu); 3 sigma.
    const se = Math.sqrt(fit?.logSpectrumVariance as number);
    expect(Math.abs(Math.log((fit?.spectrumAtZero as number) / theory))).toBeLessThan(3 * se);
    expect(fit?.coefficients[0]).toBeCloseTo(phi1, 1);
    expect(fit?.coefficients[1]).toBeCloseTo(phi2, 1);
  });

  it('block-mean variance under the fitted model equals the exact AR(1) value (1/b^2) sum (b - |k|) gamma_k (AR(1) theory)', () => {
    const phi = 0.8;
    const gamma0 = 1 / (1 - phi * phi);
    const gamma = Float64Array.from({ length: 65 }, (_, k) => gamma0 * phi ** k);
    const fit = fitAutoregression(gamma, 1_000_000);
    for (const b of [1, 5, 40, 500]) {
      let exact = b * gamma0;
      for (let k = 1; k < b; k++) exact += 2 * (b - k) * gamma0 * phi ** k;
      exact /= b * b;
      expect(relativeDifference(blockMeanVariance(gamma, fit!, b), exact)).toBeLessThan(1e-9);
    }
  });

  it('a constant window states no correlation and says why', () => {
    const estimate = autoregressiveSpectrum(new Float64Array([0, 0, 0]), 100, 0);
    expect(estimate.reliable).toBe(false);
    expect(estimate.note).toMatch(/constant/);
  });
});
