import { describe, expect, it } from 'vitest';
import { CriteriaTracker } from '../../../src/engine/criteria/criteria-tracker.js';
import { CRITERION_PRESETS, presetSpec } from '../../../src/engine/criteria/criteria-presets.js';
import type { CriterionEvent } from '../../../src/engine/criteria/criteria-events.js';
import type { CriterionSpec } from '../../../src/core/criteria/criterion-spec.js';

// Each preset against the rule's own wording, on constructed series that pass and fail at the
// edge. The numbers come from public summaries of the standards, not the standards themselves
// (those are sold); each check names the summary it was read in. Series are invented for the test.
//
// [PSTC]   IEEE PSES EMC-PSTC list, thread "Steady State Conditions - nee thermal equilibrium",
//          12 Jan 2012, quoting the IEC glossary (summary): mail-archive.com msg62539
// [ASHRAE] ASHRAE 93 steady-state conditions quoted in a forum post (summary): gaoyang168.com t-5996237-1
// [ISO]    ISO 9806-1:1994 summarised at briangwilliams.us/solar-energy/glazed-collectors.html (summary)
// [CFR91]  40 CFR 91.410(b), public law text, read at law.lawstack.com
// [CFR430] 10 CFR 430 Subpart B Appendix M, notes to the tolerance tables, public law text as
//          reproduced in a Google Books copy

const T0 = 1_700_000_000;

function preset(id: string, params: Record<string, unknown> = {}, overrides: Parameters<typeof presetSpec>[2] = {}): CriterionSpec {
  const { spec, problems } = presetSpec(id, params, overrides);
  expect(problems).toEqual([]);
  return spec as CriterionSpec;
}

/** Feeds value(t) at every `step` seconds over [0, seconds]; returns the tracker and its events. */
function run(spec: CriterionSpec, seconds: number, step: number, value: (t: number) => number, setPoint: number | null = null) {
  const tracker = new CriteriaTracker([spec], { setPoint });
  const events: CriterionEvent[] = [];
  const count = Math.round(seconds / step);
  for (let k = 0; k <= count; k++) {
    const t = k * step;
    events.push(...tracker.push(value(t), T0 + t));
  }
  const state = tracker.state(spec.name)!;
  return { tracker, events, state, holdsEvent: events.find((e) => e.kind === 'criterion-holds') };
}

describe('criterion presets', () => {
  it('every preset cites a public document and builds a valid rule with its defaults', () => {
    for (const p of CRITERION_PRESETS) {
      expect(p.source).toMatch(/https?:\/\//);
      expect(p.wording.length).toBeGreaterThan(20);
      const required = Object.fromEntries(p.parameters.filter((q) => q.default === null).map((q) => [q.key, 600]));
      if (p.id === 'us-10cfr430-m-operating') required.tolerance = 1;
      const { spec, problems } = presetSpec(p.id, required);
      expect(problems).toEqual([]);
      expect(() => new CriteriaTracker([spec!])).not.toThrow();
    }
  });

  describe('iec-62282-2: no more than 3 K, or 1 % of the absolute temperature if higher, between two readings 15 min apart [PSTC]', () => {
    const spec = preset('iec-62282-2');
    it('near 20 degC the 3 K governs (1 % of 293 K is 2.93 K): 2.99 K holds, 3.01 K does not, 3 K exactly holds ("no more than")', () => {
      for (const [rise, holds] of [[2.99, true], [3.01, false], [3, true]] as const) {
        // A sample every 10 s, rising linearly; the readings are the samples at 0 s and 900 s.
        const { state, holdsEvent } = run(spec, 900, 10, (t) => 20 + (rise * t) / 900);
        expect(state.holds).toBe(holds); // [PSTC] 3 K between two readings 15 min apart
        expect(state.value).toBeCloseTo(rise, 9);
        expect(state.tolerance).toBeCloseTo(3, 12);
        if (holds) expect(holdsEvent?.time).toBe(T0 + 900);
      }
    });
    it('near 60 degC, 1 % of the absolute temperature governs (about 3.36 K)', () => {
      // Tolerance taken of the newer reading (63.3 degC = 336.45 K at the edge): compute it from the reading.
      for (const [rise, holds] of [[3.35, true], [3.38, false]] as const) {
        const { state } = run(spec, 900, 10, (t) => 60 + (rise * t) / 900);
        const expected = 0.01 * (60 + rise + 273.15);
        expect(state.tolerance).toBeCloseTo(expected, 12); // [PSTC] 1 % of the absolute operating temperature
        expect(state.holds).toBe(holds);
      }
    });
    it('a channel in kelvin takes 1 % of the reading itself', () => {
      const kelvin = preset('iec-62282-2', { temperatureUnit: 'K' });
      const { state } = run(kelvin, 900, 10, (t) => 350 + (3.5 * t) / 900);
      expect(state.tolerance).toBeCloseTo(3.535, 12); // 1 % of 353.5 K [PSTC]
      expect(state.holds).toBe(true);
    });
    it('only the readings 15 min apart count: a spike between them is not a reading', () => {
      const { state } = run(spec, 900, 10, (t) => (t === 450 ? 40 : 20));
      expect(state.value).toBe(0);
      expect(state.holds).toBe(true);
    });
  });

  describe('iec-61810-7: less than 1 K between any two of three consecutive readings 5 min apart [PSTC]', () => {
    const spec = preset('iec-61810-7');
    it('0.99 K between the first and the last holds; 1.01 K or exactly 1 K does not ("less than")', () => {
      for (const [spread, holds] of [[0.99, true], [1.01, false], [1, false]] as const) {
        // Readings at 0, 300 and 600 s; the largest difference is between the first and the middle one.
        const value = (t: number) => (t < 300 ? 50 : t < 600 ? 50 + spread : 50 + spread / 2);
        const { state, holdsEvent } = run(spec, 600, 5, value);
        expect(state.readings).toBe(3);
        expect(state.value).toBeCloseTo(spread, 12);
        expect(state.holds).toBe(holds); // [PSTC] "variation of less than 1 K between any two out of three"
        if (holds) expect(holdsEvent?.time).toBe(T0 + 600);
      }
    });
    it('two readings are not enough', () => {
      const { state } = run(spec, 599, 1, () => 50);
      expect(state.holds).toBe(false);
      expect(state.pending).toBe('2 of 3 readings');
      expect(state.earliestHoldTime).toBe(T0 + 600); // the third reading is due at 600 s
    });
  });

  describe('iec-60034-1: gradient of at most 2 K per hour over two successive intervals [PSTC]', () => {
    const spec = preset('iec-60034-1');
    it('1.99 K/h holds after the gradient has been met for a further interval; 2.01 K/h never holds', () => {
      const ok = run(spec, 3600, 1, (t) => 80 + (1.99 * t) / 3600);
      expect(ok.state.value).toBeCloseTo(1.99, 9); // [PSTC] 2 K per hour
      expect(ok.holdsEvent?.time).toBe(T0 + 3600); // first interval fitted at 1800 s, held for another 1800 s
      expect(ok.holdsEvent?.since).toBe(T0 + 1800);
      const bad = run(spec, 3600, 1, (t) => 80 + (2.01 * t) / 3600);
      expect(bad.state.holds).toBe(false);
      expect(bad.state.value).toBeCloseTo(2.01, 9);
    });
    it('a cooling of 1.99 K/h holds too (the gradient is not signed)', () => {
      expect(run(spec, 3600, 1, (t) => 80 - (1.99 * t) / 3600).state.holds).toBe(true);
    });
  });

  describe('iec-60335-2-6: less than 1 K in 15 min [PSTC]', () => {
    const spec = preset('iec-60335-2-6');
    it('a change of 0.99 K over 15 minutes holds, 1.01 K does not', () => {
      for (const [rise, holds] of [[0.99, true], [1.01, false]] as const) {
        const { state, holdsEvent } = run(spec, 900, 1, (t) => 25 + (rise * t) / 900);
        expect(state.value).toBeCloseTo(rise, 9); // [PSTC] 1 K in 15 min
        expect(state.holds).toBe(holds);
        if (holds) expect(holdsEvent?.time).toBe(T0 + 900); // not before the window covers 15 min
      }
    });
    it('stops holding when the change over the last 15 minutes reaches 1 K, with an event', () => {
      // Steady for 20 min, then a ramp of 1.2 K per 15 min.
      const { events, state } = run(spec, 2400, 1, (t) => 25 + (t > 1200 ? (1.2 * (t - 1200)) / 900 : 0));
      const lost = events.find((e) => e.kind === 'criterion-lost');
      expect(lost).toBeDefined();
      // 1.2 (t - 1200) / 900 reaches 1 K at t = 1950 s.
      expect(lost!.time).toBe(T0 + 1950);
      expect(state.holds).toBe(false);
    });
  });

  describe('ashrae-93-inlet-temperature: within 2 % or 1.0 degC of the set point, whichever is greater, for 15 min [ASHRAE]', () => {
    const spec = preset('ashrae-93-inlet-temperature');
    const withOne = (setPoint: number, offset: number) => run(spec, 900, 1, (t) => (t === 400 ? setPoint + offset : setPoint), setPoint);
    it('at a set point of 45 degC the 1.0 degC governs (2 % is 0.9): one reading 0.99 off holds, 1.01 off does not', () => {
      expect(withOne(45, 0.99).state.tolerance).toBeCloseTo(1.0, 12); // [ASHRAE] 1.0 degC
      expect(withOne(45, 0.99).state.holds).toBe(true);
      expect(withOne(45, -1.01).state.holds).toBe(false);
    });
    it('at 60 degC the 2 % governs (1.2 degC): 1.19 off holds, 1.21 off does not', () => {
      expect(withOne(60, 1.19).state.tolerance).toBeCloseTo(1.2, 12); // [ASHRAE] 2 % of 60
      expect(withOne(60, 1.19).state.holds).toBe(true);
      expect(withOne(60, 1.21).state.holds).toBe(false);
    });
    it('without a set point from the test point the rule cannot hold and says why', () => {
      const { state } = run(spec, 900, 1, () => 45, null);
      expect(state.holds).toBe(false);
      expect(state.pending).toBe('no set point from the test point');
      expect(state.earliestHoldTime).toBeNull();
    });
  });

  describe('ashrae-93-flow: within 2 % or 0.000315 L/s of the set point [ASHRAE]', () => {
    const spec = preset('ashrae-93-flow');
    it('at 0.01 L/s the 0.000315 L/s governs; at 0.1 L/s the 2 % (0.002 L/s)', () => {
      const at = (sp: number, offset: number) => run(spec, 900, 1, (t) => (t === 10 ? sp + offset : sp), sp).state;
      expect(at(0.01, 0.000314).holds).toBe(true); // [ASHRAE] 0.000315 L/s
      expect(at(0.01, 0.000316).holds).toBe(false);
      expect(at(0.1, 0.00199).holds).toBe(true); // [ASHRAE] 2 %
      expect(at(0.1, 0.00201).holds).toBe(false);
    });
  });

  describe('ashrae-93-ambient: varying by no more than 1.5 degC over 15 min [ASHRAE]', () => {
    const spec = preset('ashrae-93-ambient');
    it('a reading 1.499 degC from the window mean holds, 1.501 does not', () => {
      // 901 readings at 20 degC but one at 20 + d: the mean is 20 + d/901 and that reading is d 900/901 from it.
      for (const [deviation, holds] of [[1.499, true], [1.501, false]] as const) {
        const d = (deviation * 901) / 900;
        const { state } = run(spec, 900, 1, (t) => (t === 300 ? 20 + d : 20));
        expect(state.value).toBeCloseTo(deviation, 9); // [ASHRAE] 1.5 degC
        expect(state.holds).toBe(holds);
      }
    });
  });

  describe('ashrae-93-outlet: outlet temperature changing less than 0.05 degC per minute [ASHRAE]', () => {
    const spec = preset('ashrae-93-outlet');
    it('0.049 degC/min holds, 0.051 degC/min does not', () => {
      expect(run(spec, 900, 1, (t) => 30 + (0.049 * t) / 60).state.holds).toBe(true); // [ASHRAE] 0.05 degC per minute
      const bad = run(spec, 900, 1, (t) => 30 + (0.051 * t) / 60).state;
      expect(bad.holds).toBe(false);
      expect(bad.value).toBeCloseTo(0.051, 9);
      expect(bad.detail.slope?.standardError).toBeCloseTo(0, 6);
    });
  });

  describe('iso-9806-1994-flow: 30 s averages against the mean of the test period, flow within 1 % [ISO]', () => {
    const spec = preset('iso-9806-1994-flow');
    it('one 30 s period 0.99 % of the mean away holds, 1.01 % does not; samples inside the period do not count alone', () => {
      for (const [fraction, holds] of [[0.0099, true], [0.0101, false]] as const) {
        // 30 averages of 1.0 kg/s over 15 min, one of them 1 + e: the mean is 1 + e/30, that average
        // is 29e/30 from it; solve 29e/30 = fraction (1 + e/30) for e.
        const e = fraction / (29 / 30 - fraction / 30);
        // Within the raised period one sample is far off (0.9) and others make up for it: only the
        // period's average counts.
        const value = (t: number) => {
          if (t < 300 || t >= 330) return 1;
          if (t === 300) return 0.9;
          return 1 + (e * 30 + 0.1) / 29;
        };
        const { state } = run(spec, 900, 1, value);
        expect(state.readings).toBe(30); // [ISO] successive 30 s periods over at least 15 min
        expect(state.value! / state.tolerance!).toBeCloseTo(fraction / 0.01, 6); // [ISO] 1 %
        expect(state.holds).toBe(holds);
      }
    });
  });

  describe('us-40cfr91.410: speed within 50 rpm or 2 % of point, idle within 75 rpm or 5 %, load within 2 % [CFR91]', () => {
    it('speed: at 2000 rpm 50 rpm governs; at 3600 rpm 2 % (72 rpm)', () => {
      const spec = preset('us-40cfr91.410-speed', { windowSeconds: 60 });
      const at = (sp: number, offset: number) => run(spec, 60, 0.1, (t) => (Math.abs(t - 30) < 1e-9 ? sp + offset : sp), sp).state;
      expect(at(2000, 49.9).holds).toBe(true); // [CFR91] plus or minus 50 rpm
      expect(at(2000, -50.1).holds).toBe(false);
      expect(at(3600, 71.9).holds).toBe(true); // [CFR91] 2 percent of point
      expect(at(3600, 72.1).holds).toBe(false);
    });
    it('idle: at 1000 rpm 75 rpm governs; at 2000 rpm 5 % (100 rpm)', () => {
      const spec = preset('us-40cfr91.410-idle-speed', { windowSeconds: 60 });
      const at = (sp: number, offset: number) => run(spec, 60, 1, (t) => (t === 30 ? sp + offset : sp), sp).state;
      expect(at(1000, 74.9).holds).toBe(true); // [CFR91] 75 rpm
      expect(at(1000, 75.1).holds).toBe(false);
      expect(at(2000, 99.9).holds).toBe(true); // [CFR91] 5 percent
      expect(at(2000, 100.1).holds).toBe(false);
    });
    it('load: 2 % of point', () => {
      const spec = preset('us-40cfr91.410-load', { windowSeconds: 60 });
      const at = (offset: number) => run(spec, 60, 1, (t) => (t === 30 ? 250 + offset : 250), 250).state;
      expect(at(4.99).holds).toBe(true); // [CFR91] 2 percent of 250
      expect(at(5.01).holds).toBe(false);
    });
    it('needs the data period: the source gives none', () => {
      expect(presetSpec('us-40cfr91.410-speed').problems).toEqual([{ key: 'windowSeconds', message: "missing: length of the mode's data period in seconds (the source gives none)" }]);
    });
  });

  describe('us-10cfr430-m: test operating tolerance (every reading) and test condition tolerance (the average) [CFR430]', () => {
    it('operating tolerance: the variation of the readings against the table value, or a percentage of the average', () => {
      const spec = preset('us-10cfr430-m-operating', { windowSeconds: 1800, tolerance: 2.0 });
      const at = (spread: number) => run(spec, 1800, 5, (t) => (t === 600 ? 80 + spread : 80)).state;
      expect(at(1.99).holds).toBe(true); // [CFR430] maximum permissible variation of any measurement
      expect(at(2.01).holds).toBe(false);
      const percent = preset('us-10cfr430-m-operating', { windowSeconds: 1800, tolerancePercent: 2 });
      const state = run(percent, 1800, 5, (t) => (t === 600 ? 102 : 100)).state;
      // [CFR430] a percentage is of the average value: 2 % of (360 x 100 + 102) / 361
      expect(state.tolerance).toBeCloseTo((0.02 * (360 * 100 + 102)) / 361, 12);
      expect(state.holds).toBe(true);
    });
    it('condition tolerance: the average against the test condition', () => {
      const spec = preset('us-10cfr430-m-condition', { windowSeconds: 1800, tolerance: 0.5 });
      expect(run(spec, 1800, 5, () => 80.49, 80).state.holds).toBe(true); // [CFR430] the average from the test condition
      expect(run(spec, 1800, 5, () => 80.51, 80).state.holds).toBe(false);
      expect(run(spec, 1800, 5, (t) => (t < 900 ? 79 : 81.99), 80).state.holds).toBe(true); // readings far off, average 80.49
    });
    it('one of tolerance or tolerancePercent, not both', () => {
      expect(presetSpec('us-10cfr430-m-operating', { windowSeconds: 60 }).problems[0]?.key).toBe('tolerance');
      expect(presetSpec('us-10cfr430-m-operating', { windowSeconds: 60, tolerance: 1, tolerancePercent: 1 }).problems[0]?.key).toBe('tolerance');
    });
  });
});
