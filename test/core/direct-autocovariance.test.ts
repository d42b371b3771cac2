import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { laggedProductSums } from '../../src/core/acf/direct-autocovariance.js';

describe('laggedProductSums', () => {
  it('is bit-identical to the plain double loop for every length and lag count', () => {
    fc.assert(
      fc.property(fc.array(fc.double({ min: -1e3, max: 1e3, noNaN: true }), { minLength: 1, maxLength: 60 }), fc.integer({ min: 0, max: 70 }), (values, maxLag) => {
        const x = Float64Array.from(values);
        const got = laggedProductSums(x, maxLag);
        for (let k = 0; k <= Math.min(maxLag, x.length - 1); k++) {
          let s = 0;
          for (let i = 0; i + k < x.length; i++) s += (x[i + k] as number) * (x[i] as number);
          expect(got[k]).toBe(s);
        }
      }),
      { numRuns: 500 },
    );
  });
});
