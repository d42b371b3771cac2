import { coverageFactor } from '../uncertainty/coverage-factor.js';

/**
 * Law of propagation of uncertainty (first order, correlated inputs) for a derived result
 * y = f(x_1, ..., x_p), with its budget, effective degrees of freedom, coverage factor and expanded
 * uncertainty.
 *
 * Method: JCGM 100:2008 (GUM), "Evaluation of measurement data - Guide to the expression of
 * uncertainty in measurement", clause 5.2, eq. (13):
 *   u_c^2(y) = sum_i sum_j c_i c_j u(x_i, x_j),  c_i = df/dx_i at the estimates,
 * split here into the diagonal part sum_i c_i^2 u^2(x_i) (the budget) and the off-diagonal part
 * sum_{i != j} c_i c_j u(x_i, x_j) (`covarianceTerm`).
 * Effective degrees of freedom: Welch-Satterthwaite, GUM G.4.1, eq. (G.2b):
 *   nu_eff = u_c^4 / sum_i (c_i u_i)^4 / nu_i,
 * derived for independent inputs. Choice with correlated inputs: no generalisation is applied. When
 * two inputs with non-zero contributions have a non-zero covariance and at least one contributing
 * input has finite degrees of freedom, `dof` is null, `dofNote` says why, and the coverage factor is
 * the normal one (nu = infinity), which is optimistic when the nu_i are small. For inputs that are
 * means of the same n paired observations, evaluate the derived quantity set by set instead (GUM
 * H.2.4, approach 2: nu = n - 1), or use the Monte Carlo method (JCGM 101:2008). (R. Willink (2007),
 * Metrologia 44, 340-349, proposes a generalisation for some correlation structures; from memory,
 * not implemented.)
 * Coverage factor: k = t_p(nu_eff) from src/core/uncertainty/coverage-factor.ts, with the real-valued
 * nu_eff by default (GUM G.4.1 allows interpolation) or nu_eff truncated to the next lower integer
 * (`dofRounding: 'truncate'`, the other choice G.4.1 gives).
 *
 * Cost: O(p^2) time, O(p) memory beyond the inputs.
 * @throws RangeError when the array sizes disagree, a variance is negative, a value is not finite, a
 *   degree of freedom is not positive, or the covariance gives a clearly negative u_c^2 (not positive
 *   semi-definite).
 * @example
 *   // y = x1 - x2, u = 0.1 and 0.2, uncorrelated, nu = 9 and 19
 *   propagateUncertainty({ values: Float64Array.of(1, 2), covariance: Float64Array.of(0.01, 0, 0, 0.04),
 *     sensitivities: Float64Array.of(1, -1), dofs: [9, 19], confidence: 0.95 });
 */
export interface PropagationInput {
  /** Input estimates x_i (used for sizes; the caller evaluates f). */
  values: Float64Array;
  /** Input covariance matrix u(x_i, x_j), p x p, row-major. */
  covariance: Float64Array;
  /** Sensitivity coefficients c_i = df/dx_i at the estimates. */
  sensitivities: Float64Array;
  /** Degrees of freedom of each u(x_i); null or Infinity for a standard uncertainty taken as known. */
  dofs?: (number | null)[];
  /** Coverage probability p of the expanded uncertainty, e.g. 0.95. */
  confidence: number;
  /** How nu_eff enters t_p(nu): as a real number (default) or truncated to an integer (GUM G.4.1). */
  dofRounding?: 'fractional' | 'truncate';
}

export interface BudgetEntry {
  index: number;
  sensitivity: number;
  standardUncertainty: number;
  /** c_i u(x_i), the component u_i(y) of GUM 5.1.3 (signed). */
  contribution: number;
  /** c_i^2 u^2(x_i) / u_c^2(y); null when u_c = 0. Shares add to 1 - covarianceTerm / u_c^2. */
  varianceShare: number | null;
  dof: number | null;
}

export interface PropagationResult {
  standardUncertainty: number;
  variance: number;
  budget: BudgetEntry[];
  /** sum over i != j of c_i c_j u(x_i, x_j). */
  covarianceTerm: number;
  /** Welch-Satterthwaite nu_eff; null for infinite (all inputs known) or not applicable (see dofNote). */
  dof: number | null;
  dofNote?: string;
  /** The nu used for the coverage factor (null = infinity). */
  coverageDof: number | null;
  coverageFactor: number | null;
  expandedUncertainty: number | null;
  confidence: number;
}

/** Relative size below which a negative u_c^2 is taken as round-off of a zero variance. */
const ROUND_OFF = 1e-12;

export function propagateUncertainty(input: PropagationInput): PropagationResult {
  const { covariance, sensitivities, confidence } = input;
  const p = input.values.length;
  checkSquare(covariance, p, 'propagateUncertainty covariance');
  if (sensitivities.length !== p) throw new RangeError(`propagateUncertainty requires ${p} sensitivities, got ${sensitivities.length}`);
  const dofs = input.dofs ?? [];
  if (dofs.length !== 0 && dofs.length !== p) throw new RangeError(`propagateUncertainty requires ${p} degrees of freedom, got ${dofs.length}`);
  for (let i = 0; i < p; i++) {
    if (!Number.isFinite(sensitivities[i] as number)) throw new RangeError(`propagateUncertainty: sensitivity ${i} is not finite`);
    const nu = dofs[i];
    if (nu !== undefined && nu !== null && !(nu > 0)) throw new RangeError(`propagateUncertainty: degrees of freedom ${i} must be positive`);
  }

  let diagonal = 0;
  let offDiagonal = 0;
  let scale = 0;
  let correlated = false;
  for (let i = 0; i < p; i++) {
    const ci = sensitivities[i] as number;
    for (let j = 0; j < p; j++) {
      const term = ci * (sensitivities[j] as number) * (covariance[i * p + j] as number);
      scale += Math.abs(term);
      if (i === j) diagonal += term;
      else {
        offDiagonal += term;
        if (term !== 0) correlated = true;
      }
    }
  }
  let variance = diagonal + offDiagonal;
  if (variance < 0) {
    if (variance < -ROUND_OFF * scale) throw new RangeError('propagateUncertainty: the covariance matrix gives a negative variance (not positive semi-definite)');
    variance = 0;
  }
  const standardUncertainty = Math.sqrt(variance);

  const budget: BudgetEntry[] = [];
  let wsDenominator = 0;
  let finiteDofContributes = false;
  for (let i = 0; i < p; i++) {
    const ci = sensitivities[i] as number;
    const ui = Math.sqrt(covariance[i * p + i] as number);
    const contribution = ci * ui;
    const nu = finiteDof(dofs[i]);
    if (nu !== null && contribution !== 0) {
      finiteDofContributes = true;
      wsDenominator += contribution ** 4 / nu;
    }
    budget.push({
      index: i,
      sensitivity: ci,
      standardUncertainty: ui,
      contribution,
      varianceShare: variance > 0 ? (contribution * contribution) / variance : null,
      dof: nu,
    });
  }

  let dof: number | null = null;
  let dofNote: string | undefined;
  if (variance === 0) {
    if (finiteDofContributes) dofNote = 'combined standard uncertainty is zero: effective degrees of freedom undefined';
  } else if (finiteDofContributes && correlated) {
    dofNote =
      'Welch-Satterthwaite (GUM G.4.1) assumes independent inputs and these are correlated: effective degrees of freedom not computed; ' +
      'the coverage factor uses the normal distribution (nu = infinity), optimistic for small nu_i; evaluate per observation set (GUM H.2.4) or by Monte Carlo instead';
  } else if (finiteDofContributes) {
    dof = (variance * variance) / wsDenominator;
  }
  const rounding = input.dofRounding ?? 'fractional';
  // Truncation never goes below 1, where t_p(nu) still exists.
  const coverageDof = dof === null ? null : rounding === 'truncate' ? Math.max(1, Math.floor(dof)) : dof;
  const k = coverageFactor(confidence, coverageDof ?? Infinity);
  const result: PropagationResult = {
    standardUncertainty,
    variance,
    budget,
    covarianceTerm: offDiagonal,
    dof,
    coverageDof,
    coverageFactor: k,
    expandedUncertainty: k === null ? null : k * standardUncertainty,
    confidence,
  };
  if (dofNote !== undefined) result.dofNote = dofNote;
  return result;
}

/**
 * Joint propagation to several derived results y = f(x): U_y = J U_x J^T, with J the q x p Jacobian
 * dy_l/dx_i at the estimates (JCGM 100:2008, F.1.2.3 eq. (F.2) for the output covariances, from
 * memory; H.2.3, approach 1). The output correlation r(y_l, y_m) = u(y_l, y_m) / (u(y_l) u(y_m))
 * (GUM eq. (14)); an entry whose u(y_l) or u(y_m) is zero is undefined and set to 0 (1 on the
 * diagonal).
 *
 * Cost: O(q p^2 + q^2 p) time, O(q p + q^2) memory.
 * @throws RangeError when the sizes disagree or a value is not finite.
 */
export interface JointPropagation {
  outputCount: number;
  /** U_y, q x q row-major. */
  covariance: Float64Array;
  standardUncertainties: Float64Array;
  /** r(y_l, y_m), q x q row-major. */
  correlation: Float64Array;
}

export function propagateJointly(values: Float64Array, covariance: Float64Array, jacobian: Float64Array): JointPropagation {
  const p = values.length;
  checkSquare(covariance, p, 'propagateJointly covariance');
  if (p === 0 || jacobian.length % p !== 0) throw new RangeError(`propagateJointly requires a q x ${p} Jacobian, got ${jacobian.length} entries`);
  const q = jacobian.length / p;
  for (let i = 0; i < jacobian.length; i++) if (!Number.isFinite(jacobian[i] as number)) throw new RangeError('propagateJointly: the Jacobian has a non-finite entry');
  const ju = new Float64Array(q * p); // J U_x
  for (let l = 0; l < q; l++) {
    for (let j = 0; j < p; j++) {
      let sum = 0;
      for (let i = 0; i < p; i++) sum += (jacobian[l * p + i] as number) * (covariance[i * p + j] as number);
      ju[l * p + j] = sum;
    }
  }
  const out = new Float64Array(q * q);
  for (let l = 0; l < q; l++) {
    for (let m = l; m < q; m++) {
      let sum = 0;
      for (let j = 0; j < p; j++) sum += (ju[l * p + j] as number) * (jacobian[m * p + j] as number);
      out[l * q + m] = sum;
      out[m * q + l] = sum;
    }
  }
  const standardUncertainties = new Float64Array(q);
  for (let l = 0; l < q; l++) standardUncertainties[l] = Math.sqrt(Math.max(0, out[l * q + l] as number));
  return { outputCount: q, covariance: out, standardUncertainties, correlation: correlationMatrix(out, q) };
}

/**
 * Correlation matrix r_lm = V_lm / sqrt(V_ll V_mm) of a q x q covariance matrix (GUM eq. (14)).
 * Entries involving a zero variance are undefined and set to 0, the diagonal to 1. Values are clamped
 * to [-1, 1] against round-off.
 */
export function correlationMatrix(covariance: Float64Array, size: number): Float64Array {
  checkSquare(covariance, size, 'correlationMatrix');
  const sd = new Float64Array(size);
  for (let l = 0; l < size; l++) sd[l] = Math.sqrt(Math.max(0, covariance[l * size + l] as number));
  const r = new Float64Array(size * size);
  for (let l = 0; l < size; l++) {
    for (let m = 0; m < size; m++) {
      const denominator = (sd[l] as number) * (sd[m] as number);
      r[l * size + m] = l === m ? 1 : denominator > 0 ? Math.max(-1, Math.min(1, (covariance[l * size + m] as number) / denominator)) : 0;
    }
  }
  return r;
}

/**
 * Combined variance with the higher-order terms of the Taylor series, for independent inputs
 * (JCGM 100:2008, 5.1.2 Note, eq. after (10)):
 *   u_c^2 = sum_i c_i^2 u_i^2
 *         + sum_i sum_j [ 1/2 (d2f/dx_i dx_j)^2 + c_i d3f/(dx_i dx_j^2) ] u_i^2 u_j^2.
 * The Note states it for inputs with symmetric distributions (normal): the terms come from their
 * fourth moments, so for rectangular inputs they are an approximation (JCGM 101 9.3 shows the size of
 * the difference). `secondDerivatives` is the p x p Hessian; `thirdDerivatives`, optional (zero when
 * absent), holds at (i, j) the derivative d3f/(dx_i dx_j^2).
 *
 * Cost: O(p^2).
 * @returns standardUncertainty null (with a note) when third-derivative terms make u_c^2 negative.
 * @throws RangeError when the sizes disagree or a value is not finite or a u_i is negative.
 */
export interface SecondOrderInput {
  standardUncertainties: Float64Array;
  sensitivities: Float64Array;
  secondDerivatives: Float64Array;
  thirdDerivatives?: Float64Array;
}

export interface SecondOrderResult {
  /** u_c^2 including the higher-order terms. */
  variance: number;
  standardUncertainty: number | null;
  firstOrderVariance: number;
  /** The double sum of the Note. */
  higherOrderTerm: number;
  note?: string;
}

export function secondOrderVariance(input: SecondOrderInput): SecondOrderResult {
  const { standardUncertainties: u, sensitivities: c, secondDerivatives: hessian, thirdDerivatives: third } = input;
  const p = u.length;
  if (c.length !== p) throw new RangeError(`secondOrderVariance requires ${p} sensitivities, got ${c.length}`);
  checkSquare(hessian, p, 'secondOrderVariance secondDerivatives', false);
  if (third !== undefined) checkSquare(third, p, 'secondOrderVariance thirdDerivatives', false);
  let firstOrderVariance = 0;
  let higherOrderTerm = 0;
  for (let i = 0; i < p; i++) {
    const ui = u[i] as number;
    if (!(ui >= 0) || !Number.isFinite(ui)) throw new RangeError(`secondOrderVariance: standard uncertainty ${i} must be finite and non-negative`);
    const ci = c[i] as number;
    firstOrderVariance += ci * ci * ui * ui;
    for (let j = 0; j < p; j++) {
      const uj = u[j] as number;
      const h = hessian[i * p + j] as number;
      const t = third === undefined ? 0 : (third[i * p + j] as number);
      higherOrderTerm += (0.5 * h * h + ci * t) * ui * ui * uj * uj;
    }
  }
  const variance = firstOrderVariance + higherOrderTerm;
  if (!Number.isFinite(variance)) throw new RangeError('secondOrderVariance: a derivative is not finite');
  if (variance < 0) {
    return { variance, standardUncertainty: null, firstOrderVariance, higherOrderTerm, note: 'third-derivative terms make the variance negative: the Taylor series does not represent this model here' };
  }
  return { variance, standardUncertainty: Math.sqrt(variance), firstOrderVariance, higherOrderTerm };
}

function finiteDof(nu: number | null | undefined): number | null {
  return nu === undefined || nu === null || nu === Infinity ? null : nu;
}

/** Checks a size x size matrix for finite entries and, for a covariance matrix, non-negative variances. */
function checkSquare(matrix: Float64Array, size: number, what: string, isCovariance = true): void {
  if (matrix.length !== size * size) throw new RangeError(`${what} requires ${size} x ${size} entries, got ${matrix.length}`);
  for (let i = 0; i < matrix.length; i++) if (!Number.isFinite(matrix[i] as number)) throw new RangeError(`${what} has a non-finite entry`);
  if (isCovariance) for (let i = 0; i < size; i++) if ((matrix[i * size + i] as number) < 0) throw new RangeError(`${what} has a negative variance`);
}
