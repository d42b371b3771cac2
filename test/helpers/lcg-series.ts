/**
 * The deterministic series of test/fixtures/reference/scripts/lcg_series.py, bit for bit: the
 * Park-Miller stream of NIST SP 1065's test set drives AR(1) recursions with uniform innovations
 * sqrt(12) (u - 1/2). Fixture scripts in Python and R regenerate the same doubles.
 */
const MODULUS = 2147483647;
const SQRT12 = Math.sqrt(12);

export function lcgUniforms(seed: number, n: number): Float64Array {
  const out = new Float64Array(n);
  let state = seed;
  for (let i = 0; i < n; i++) {
    state = (16807 * state) % MODULUS; // exact: 16807 * 2^31 < 2^53
    out[i] = state / MODULUS;
  }
  return out;
}

export function lcgAr1(seed: number, phi: number, n: number): Float64Array {
  const u = lcgUniforms(seed, n);
  const out = new Float64Array(n);
  let x = 0;
  for (let i = 0; i < n; i++) {
    x = phi * x + SQRT12 * ((u[i] as number) - 0.5);
    out[i] = x;
  }
  return out;
}
