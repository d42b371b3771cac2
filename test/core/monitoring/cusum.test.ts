import { describe, expect, it } from 'vitest';
import { TwoSidedCusum, decisionIntervalForArl, siegmundArl, twoSidedArl } from '../../../src/core/stationarity/cusum.js';
import { SeededRandom } from '../../../src/core/random/seeded-random.js';

/**
 * Two-sided ARLs of the tabular CUSUM with k = 0.5, from the table of D. C. Montgomery,
 * "Introduction to Statistical Quality Control" (Wiley), CUSUM chapter. FROM MEMORY, not read:
 * h = 4: ARL0 = 168, ARL(1 sigma) = 8.38; h = 5: ARL0 = 465, ARL(1 sigma) = 10.4.
 */
const MONTGOMERY_FROM_MEMORY = [
  { h: 4, shift: 0, arl: 168, lastDigit: 1 },
  { h: 4, shift: 1, arl: 8.38, lastDigit: 0.01 },
  { h: 5, shift: 0, arl: 465, lastDigit: 1 },
  { h: 5, shift: 1, arl: 10.4, lastDigit: 0.1 },
];

/** Monte Carlo run lengths of a fresh chart on i.i.d. N(shift, 1) inputs, counting the alarming input. */
function monteCarloArl(h: number, shift: number, replicates: number, seed: number): { mean: number; standardError: number } {
  const random = new SeededRandom(seed);
  const chart = new TwoSidedCusum({ reference: 0.5, decisionInterval: h });
  let sum = 0;
  let squares = 0;
  for (let r = 0; r < replicates; r++) {
    chart.reset();
    let length = 0;
    do length++;
    while (chart.update(random.normal() + shift) === null);
    sum += length;
    squares += length * length;
  }
  const mean = sum / replicates;
  return { mean, standardError: Math.sqrt((squares / replicates - mean * mean) / replicates) };
}

// Replicates: run lengths are close to geometric, so their SD is about the ARL itself; 10000
// replicates give a Monte Carlo standard error of about 1 % of the ARL in control (measured:
// 1.6 at ARL 168, 4.5 at 465) and about 0.5 % at a one-sigma shift. Cost: about 2.5 million
// updates for h = 4 and 5 in control together, under a second.
const REPLICATES = 10_000;
// Siegmund's approximation differs from the tabulated ARLs by under 1 % at these four settings
// (169.0 vs 168, 469.1 vs 465, 8.34 vs 8.38, 10.34 vs 10.4): that is its allowance below.
const SIEGMUND_ALLOWANCE = 0.01;

describe('TwoSidedCusum', () => {
  describe('Monte Carlo average run lengths on i.i.d. N(0,1), k = 0.5', () => {
    for (const [index, row] of MONTGOMERY_FROM_MEMORY.entries()) {
      it(`h = ${row.h}, shift = ${row.shift} sigma: matches Montgomery's table (from memory) and Siegmund's approximation (Siegmund 1985)`, () => {
        const { mean, standardError } = monteCarloArl(row.h, row.shift, REPLICATES, 9001 + index);
        // Against the table: 4 Monte Carlo standard errors plus half a unit of the table's last digit.
        expect(Math.abs(mean - row.arl)).toBeLessThan(4 * standardError + row.lastDigit / 2);
        // Against Siegmund's approximation, computed: 4 standard errors plus the approximation's allowance.
        const siegmund = twoSidedArl(row.shift, 0.5, row.h);
        expect(Math.abs(mean - siegmund)).toBeLessThan(4 * standardError + SIEGMUND_ALLOWANCE * siegmund);
      });
    }
  });

  it("Siegmund's two-sided ARL is within 1 % of Montgomery's table (from memory) at k = 0.5, h = 4 and 5", () => {
    for (const row of MONTGOMERY_FROM_MEMORY) {
      expect(Math.abs(twoSidedArl(row.shift, 0.5, row.h) / row.arl - 1)).toBeLessThan(SIEGMUND_ALLOWANCE);
    }
  });

  it('siegmundArl follows its closed form, including the Delta = 0 limit b^2 (Siegmund 1985)', () => {
    const b = 4 + 1.166;
    // Delta = 0: ARL = b^2; just beside it the closed form must join the series smoothly.
    expect(siegmundArl(0.5, 0.5, 4)).toBeCloseTo(b * b, 12);
    const near = siegmundArl(0.5 + 1e-6, 0.5, 4);
    expect(Math.abs(near - b * b) / (b * b)).toBeLessThan(1e-5);
    const delta = -0.5;
    const closed = (Math.exp(-2 * delta * b) + 2 * delta * b - 1) / (2 * delta * delta);
    expect(siegmundArl(0, 0.5, 4)).toBeCloseTo(closed, 9);
    // The series used for |Delta b| < 1e-3 agrees with the closed form (expm1 keeps it accurate to
    // about 1e-12 there) on both sides of the switch.
    for (const x of [-0.999e-3, -1.001e-3, 0.999e-3, 1.001e-3, 1e-5]) {
      const d = x / b;
      const reference = (Math.expm1(-2 * x) + 2 * x) / (2 * d * d);
      expect(Math.abs(siegmundArl(0.5 + d, 0.5, 4) / reference - 1)).toBeLessThan(1e-9);
    }
    // A far-negative drift overflows to Infinity, never NaN.
    expect(siegmundArl(-400, 0.5, 5)).toBe(Infinity);
    expect(twoSidedArl(0, 400, 5)).toBe(Infinity);
  });

  it('decisionIntervalForArl round-trips through twoSidedArl', () => {
    for (const k of [0, 0.25, 0.5, 1]) {
      for (const target of [50, 370, 1000, 1e5]) {
        const h = decisionIntervalForArl(target, k);
        expect(h).toBeGreaterThan(0);
        expect(Math.abs(twoSidedArl(0, k, h) / target - 1)).toBeLessThan(1e-9);
      }
    }
    expect(decisionIntervalForArl(twoSidedArl(0, 0.5, 4), 0.5)).toBeCloseTo(4, 9);
    expect(decisionIntervalForArl(1.01, 0.5)).toBe(0);
    expect(() => decisionIntervalForArl(1, 0.5)).toThrow(RangeError);
  });

  it('alarms on the side of the shift and estimates the change point as the start of the alarming run', () => {
    const chart = new TwoSidedCusum({ reference: 0.5, decisionInterval: 4 });
    const inputs = [0.2, -0.3, 0.1, 0, -0.4, 2, 2, 2, 2];
    const alarms = inputs.map((z) => chart.update(z));
    // Upper sum: 0, 0, 0, 0, 0, 1.5, 3, 4.5 -> alarm at index 7; its run began at index 5.
    expect(alarms.slice(0, 7)).toEqual([null, null, null, null, null, null, null]);
    expect(alarms[7]).toBe('up');
    expect(chart.changePoint).toBe(5);
    expect(chart.upper).toBeCloseTo(6, 12);
    expect(chart.lower).toBe(0);
    expect(chart.count).toBe(9);

    const down = new TwoSidedCusum({ reference: 0.5, decisionInterval: 2 });
    [1, 1, -1.5, -1.5, -1.5].forEach((z) => down.update(z));
    expect(down.alarm).toBe('down');
    expect(down.changePoint).toBe(2);
    down.reset();
    expect([down.upper, down.lower, down.count, down.alarm, down.changePoint]).toEqual([0, 0, 0, null, null]);
  });

  it('state() and restore() round-trip: the restored chart continues identically', () => {
    const random = new SeededRandom(5);
    const original = new TwoSidedCusum({ reference: 0.25, decisionInterval: 3 });
    for (let i = 0; i < 500; i++) original.update(random.normal() + (i > 300 ? 0.6 : 0));
    const copy = TwoSidedCusum.restore(JSON.parse(JSON.stringify(original.state())));
    for (let i = 0; i < 200; i++) {
      const z = random.normal();
      expect(copy.update(z)).toBe(original.update(z));
    }
    expect(copy.state()).toEqual(original.state());
    expect(() => copy.restore({ ...copy.state(), decisionInterval: 4 })).toThrow(RangeError);
    expect(() => TwoSidedCusum.restore({ ...copy.state(), upper: 1, upperRunStart: -1 })).toThrow(RangeError);
  });

  it('rejects invalid parameters and non-finite inputs', () => {
    expect(() => new TwoSidedCusum({ reference: -1, decisionInterval: 4 })).toThrow(RangeError);
    expect(() => new TwoSidedCusum({ reference: 0.5, decisionInterval: 0 })).toThrow(RangeError);
    expect(() => new TwoSidedCusum({ reference: 0.5, decisionInterval: 4 }).update(Number.NaN)).toThrow(RangeError);
  });
});
