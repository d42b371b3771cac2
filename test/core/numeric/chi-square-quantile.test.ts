import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import chisquareQuantileExact from '@stdlib/stats-base-dists-chisquare-quantile';
import { chiSquareQuantile, WILSON_HILFERTY_FROM } from '../../../src/core/numeric/chi-square-quantile.js';

interface Case { dof: number; p: number; quantile: number }
// Source: scipy.stats.chi2.ppf (scipy 1.10.1, Debian bookworm), written by
// test/fixtures/reference/scripts/chi-square-quantile.py.
const fixture = JSON.parse(readFileSync(new URL('../../fixtures/reference/chi-square-quantile.json', import.meta.url), 'utf8')) as { cases: Case[] };

describe('chi-square quantiles at large degrees of freedom (Wilson-Hilferty from 1000 on)', () => {
  it('agree with scipy.stats.chi2.ppf to a relative 2e-5 from 1000 to 1e7 degrees of freedom', () => {
    expect(fixture.cases.length).toBeGreaterThanOrEqual(50);
    for (const c of fixture.cases) {
      const q = chiSquareQuantile(c.p, c.dof);
      expect(Math.abs(q / c.quantile - 1), `k = ${c.dof}, p = ${c.p}`).toBeLessThan(2e-5);
    }
  });

  it('below 1000 degrees of freedom are stdlib\'s inversion of the incomplete gamma function, unchanged', () => {
    for (const k of [1, 2.5, 10, 100, WILSON_HILFERTY_FROM - 1]) {
      for (const p of [0.025, 0.5, 0.99]) expect(chiSquareQuantile(p, k)).toBe(chisquareQuantileExact(p, k));
    }
  });

  it('pass the edges of p to the exact inversion (0, 1 and outside give what stdlib gives)', () => {
    for (const p of [0, 1, -0.5, Number.NaN]) expect(Object.is(chiSquareQuantile(p, 5000), chisquareQuantileExact(p, 5000))).toBe(true);
  });
});
