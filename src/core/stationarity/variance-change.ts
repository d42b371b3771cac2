/**
 * Variance-change test: has a channel's noise level changed? The ratio of a recent long-run
 * variance to a reference one, referred to Fisher's F distribution, two-sided.
 *
 * Each long-run variance (sigma_inf^2 = variance * tau_int, the quantity that sets the
 * uncertainty of a mean) comes with equivalent degrees of freedom nu from its estimator (batch
 * means: batches - 1; window estimators: see src/core/tau). Treating each as a scaled chi-square,
 * nu s^2 / sigma^2 ~ chi^2(nu) (the Satterthwaite approximation), and the two as independent
 * (disjoint stretches of data, separated by a few tau_int), the ratio
 *   R = recent / reference ~ F(nu_recent, nu_reference) when the variance has not changed.
 * p = 2 min(P(F <= R), P(F >= R)), capped at 1; a change is declared when p < alpha, 'up' when
 * R > 1. The F test for equal variances: G. W. Snedecor & W. G. Cochran (1989), "Statistical
 * Methods", 8th ed., Iowa State University Press (from memory); a variance estimate with
 * equivalent degrees of freedom treated as a scaled chi-square as in F. E. Satterthwaite (1946),
 * "An approximate distribution of estimates of variance components", Biometrics Bulletin 2(6),
 * 110-114 (from memory). Default alpha = 0.01: a monitor repeats the test, so each look gets a
 * small false-alarm rate (our choice; the caller sets it).
 * Caveat: the F test is sensitive to non-normal tails when nu is small; long-run variances built
 *   from block means of several tau_int are close to normal (central limit), which is the use here.
 *
 * F distribution function: P(F(d1, d2) <= f) = I_x(d1/2, d2/2), x = d1 f / (d1 f + d2), and the
 * upper tail I_y(d2/2, d1/2), y = d2 / (d1 f + d2) (M. Abramowitz & I. A. Stegun (1964), Handbook
 * of Mathematical Functions, 26.6.2, from memory; symmetry I_x(a,b) = 1 - I_(1-x)(b,a), DLMF 8.17.4:
 * F. W. J. Olver et al. (eds.), NIST Digital Library of Mathematical Functions).
 * The regularised incomplete beta I_x(a, b) is computed here from its continued fraction
 * (DLMF 8.17.22), evaluated by the modified Lentz method (I. J. Thompson & A. R. Barnett (1986),
 * "Coulomb and Bessel functions of complex arguments and order", J. Comput. Phys. 64, 490-509),
 * on the side x < (a + 1) / (a + b + 2) where it converges fast, the other tail by the symmetry;
 * ln B(a, b) from Stirling's series with the large terms differenced analytically. Why our own:
 * @stdlib/math-base-special-betainc is only a transitive dependency; the chi-square shortcut
 * (a ratio against a known reference) would ignore the reference's own sampling error, which is
 * of the same size as the recent one's. Accuracy in each tail, against the incomplete beta at 50
 * digits (mpmath; test/fixtures/reference/f-distribution.json), down to tail probabilities of
 * 1e-10: about 2e-14 relative for dofs up to 100, 1e-13 at 1000, 1e-12 at 2e4 and 2e-10 at 1e6
 * (the rounding of the log prefactor grows with the dof). scipy 1.10's f.sf is off by up to 1e-5
 * on the same grid, in the complement tail at small dofs.
 * Degrees of freedom above 1e7 are treated as 1e7 (the distribution no longer changes visibly).
 *
 * Cost: O(sqrt(max(d1, d2))) continued-fraction terms in the worst case, a few microseconds.
 */
export interface LongRunVarianceEstimate {
  /** Long-run variance sigma_inf^2 (variance * tau_int), squared data units. */
  longRunVariance: number;
  /** Equivalent (chi-square) degrees of freedom of that estimate. */
  dof: number;
}

export interface VarianceChangeResult {
  /** recent / reference; null when either variance is zero. */
  ratio: number | null;
  /** Two-sided p-value from F(dof recent, dof reference); null when the test cannot be made. */
  pValue: number | null;
  changed: boolean;
  direction: 'up' | 'down' | null;
  reliable: boolean;
  note?: string;
}

const MAX_DOF = 1e7;

export function varianceChangeTest(recent: LongRunVarianceEstimate, reference: LongRunVarianceEstimate, alpha = 0.01): VarianceChangeResult {
  if (!(alpha > 0 && alpha < 1)) throw new RangeError('variance change test requires 0 < alpha < 1');
  for (const estimate of [recent, reference]) {
    if (!(estimate.longRunVariance >= 0) || !Number.isFinite(estimate.longRunVariance)) {
      throw new RangeError('variance change test requires finite non-negative long-run variances');
    }
    if (Number.isNaN(estimate.dof)) throw new RangeError('variance change test requires numeric degrees of freedom');
  }
  if (!(recent.dof > 0) || !(reference.dof > 0)) {
    return { ratio: null, pValue: null, changed: false, direction: null, reliable: false, note: 'degrees of freedom must be positive' };
  }
  if (!(recent.longRunVariance > 0) || !(reference.longRunVariance > 0)) {
    return { ratio: null, pValue: null, changed: false, direction: null, reliable: false, note: 'a long-run variance is zero (constant data)' };
  }
  const ratio = recent.longRunVariance / reference.longRunVariance;
  const { lower, upper } = fDistributionTails(ratio, recent.dof, reference.dof);
  const pValue = Math.min(1, 2 * Math.min(lower, upper));
  const changed = pValue < alpha;
  return { ratio, pValue, changed, direction: changed ? (ratio > 1 ? 'up' : 'down') : null, reliable: true };
}

/** P(F <= f) and P(F > f) for Fisher's F with (d1, d2) degrees of freedom, each tail to full relative precision. */
export function fDistributionTails(f: number, d1: number, d2: number): { lower: number; upper: number } {
  if (!(d1 > 0) || !(d2 > 0)) throw new RangeError('F distribution requires positive degrees of freedom');
  if (Number.isNaN(f)) throw new RangeError('F distribution requires a numeric argument');
  if (f <= 0) return { lower: 0, upper: 1 };
  if (f === Infinity) return { lower: 1, upper: 0 };
  const a = Math.min(d1, MAX_DOF) / 2;
  const b = Math.min(d2, MAX_DOF) / 2;
  // x = d1 f / (d1 f + d2) and 1 - x = d2 / (d1 f + d2), both formed without subtraction.
  const denominator = 2 * a * f + 2 * b;
  const x = (2 * a * f) / denominator;
  const y = (2 * b) / denominator;
  return regularizedIncompleteBeta(x, y, a, b);
}

/** P(F(d1, d2) <= f). */
export function fDistributionCdf(f: number, d1: number, d2: number): number {
  return fDistributionTails(f, d1, d2).lower;
}

/**
 * Regularised incomplete beta I_x(a, b) (lower) and 1 - I_x(a, b) (upper), given x and y = 1 - x
 * separately so that neither tail loses digits. The tail on the fast side of the continued
 * fraction is computed directly, the other as its complement.
 */
export function regularizedIncompleteBeta(x: number, y: number, a: number, b: number): { lower: number; upper: number } {
  if (!(a > 0) || !(b > 0)) throw new RangeError('incomplete beta requires positive parameters');
  if (!(x >= 0 && y >= 0) || Math.abs(x + y - 1) > 1e-12) throw new RangeError('incomplete beta requires x in [0, 1] and y = 1 - x');
  if (x === 0) return { lower: 0, upper: 1 };
  if (y === 0) return { lower: 1, upper: 0 };
  // x^a y^b / B(a, b), in logarithms.
  const logFront = a * Math.log(x) + b * Math.log(y) - logBeta(a, b);
  if (x < (a + 1) / (a + b + 2)) {
    const lower = (Math.exp(logFront) * betaContinuedFraction(x, a, b)) / a;
    return { lower, upper: 1 - lower };
  }
  const upper = (Math.exp(logFront) * betaContinuedFraction(y, b, a)) / b;
  return { lower: 1 - upper, upper };
}

const LENTZ_TINY = 1e-300;
const LENTZ_EPSILON = 1e-16;
const LENTZ_MAX_TERMS = 20000;

/**
 * The continued fraction of DLMF 8.17.22, 1 / (1 + d1 / (1 + d2 / (1 + ...))), with
 * d_{2m+1} = -(a + m)(a + b + m) x / ((a + 2m)(a + 2m + 1)) and d_{2m} = m (b - m) x / ((a + 2m - 1)(a + 2m)),
 * so that I_x(a, b) = x^a (1 - x)^b / (a B(a, b)) times this value. Modified Lentz evaluation.
 */
function betaContinuedFraction(x: number, a: number, b: number): number {
  let c = 1;
  let d = 1 - ((a + b) * x) / (a + 1);
  if (Math.abs(d) < LENTZ_TINY) d = LENTZ_TINY;
  d = 1 / d;
  let value = d;
  for (let m = 1; m <= LENTZ_MAX_TERMS; m++) {
    const twoM = 2 * m;
    // Even step d_{2m}.
    let term = (m * (b - m) * x) / ((a + twoM - 1) * (a + twoM));
    d = 1 + term * d;
    if (Math.abs(d) < LENTZ_TINY) d = LENTZ_TINY;
    c = 1 + term / c;
    if (Math.abs(c) < LENTZ_TINY) c = LENTZ_TINY;
    d = 1 / d;
    value *= d * c;
    // Odd step d_{2m+1}.
    term = -((a + m) * (a + b + m) * x) / ((a + twoM) * (a + twoM + 1));
    d = 1 + term * d;
    if (Math.abs(d) < LENTZ_TINY) d = LENTZ_TINY;
    c = 1 + term / c;
    if (Math.abs(c) < LENTZ_TINY) c = LENTZ_TINY;
    d = 1 / d;
    const step = d * c;
    value *= step;
    if (Math.abs(step - 1) < LENTZ_EPSILON) break;
  }
  return value;
}

const HALF_LOG_TWO_PI = 0.5 * Math.log(2 * Math.PI);
/** Stirling's series is used from this argument up; below, the recurrence Gamma(x + 1) = x Gamma(x) lifts x. */
const STIRLING_FROM = 10;

/**
 * Remainder of Stirling's series, ln Gamma(x) - [(x - 1/2) ln x - x + ln(2 pi)/2], for x >= 10:
 * 1/(12x) - 1/(360x^3) + 1/(1260x^5) - 1/(1680x^7) + 1/(1188x^9) (DLMF 5.11.1); the next term is
 * below 2e-14 at x = 10.
 */
function stirlingRemainder(x: number): number {
  const inverse = 1 / x;
  const inverseSquare = inverse * inverse;
  return inverse * (1 / 12 - inverseSquare * (1 / 360 - inverseSquare * (1 / 1260 - inverseSquare * (1 / 1680 - inverseSquare / 1188))));
}

/** ln Gamma(x) for x > 0: Stirling's series, after lifting x to 10 by the recurrence when needed. */
function logGamma(x: number): number {
  let product = 1;
  let z = x;
  while (z < STIRLING_FROM) {
    product *= z;
    z += 1;
  }
  return (z - 0.5) * Math.log(z) - z + HALF_LOG_TWO_PI + stirlingRemainder(z) - Math.log(product);
}

/**
 * ln B(a, b). With b the larger, ln Gamma(b) - ln Gamma(a + b) is formed from Stirling's series with
 * the large terms cancelled analytically: -(b - 1/2) log1p(a / b) - a ln(a + b) + a + remainders.
 */
function logBeta(p: number, q: number): number {
  const a = Math.min(p, q);
  const b = Math.max(p, q);
  if (b < STIRLING_FROM) return logGamma(a) + logGamma(b) - logGamma(a + b);
  const sum = a + b;
  const correction = stirlingRemainder(b) - stirlingRemainder(sum);
  if (a < STIRLING_FROM) return logGamma(a) - (b - 0.5) * Math.log1p(a / b) - a * Math.log(sum) + a + correction;
  // Both large: the terms (a - 1/2) ln a - a of ln Gamma(a) are merged too, so that no term exceeds (a + b) ln 2 or so.
  return (a - 0.5) * Math.log(a / sum) - 0.5 * Math.log(sum) + HALF_LOG_TWO_PI - (b - 0.5) * Math.log1p(a / b) + stirlingRemainder(a) + correction;
}
