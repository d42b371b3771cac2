import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { CriteriaTracker, CRITERIA_STATE_VERSION } from '../../../src/engine/criteria/criteria-tracker.js';
import type { CriterionEvent } from '../../../src/engine/criteria/criteria-events.js';
import type { CriterionSpec } from '../../../src/core/criteria/criterion-spec.js';
import { naiveMax, naiveMean, naiveMin, pick, windowIndices } from '../../helpers/naive-criteria.js';

// The tracker's hold logic, events, earliest hold time, set point, restart and saved state, on
// invented series (no outside source: the behaviour is the project's own definition).

const T0 = 1_700_000_000;

function rule(partial: Partial<CriterionSpec> & Pick<CriterionSpec, 'name' | 'statistic'>): CriterionSpec {
  return {
    basis: { kind: 'readings' },
    window: { kind: 'seconds', seconds: 10 },
    tolerance: { absolute: 1, relative: null, relativeTo: 'reading', zero: 0 },
    comparison: 'at-most',
    setPoint: { kind: 'none' },
    minReadings: 2,
    holdSeconds: 0,
    lag: 1,
    direction: 'any',
    perSeconds: 1,
    preset: null,
    source: null,
    wording: null,
    ...partial,
  };
}

function feed(tracker: CriteriaTracker, from: number, to: number, step: number, value: (t: number) => number): CriterionEvent[] {
  const events: CriterionEvent[] = [];
  for (let t = from; t <= to + 1e-9; t += step) events.push(...tracker.push(value(t), T0 + Math.round(t * 1e6) / 1e6));
  return events;
}

describe('CriteriaTracker', () => {
  it('holds after the condition has been met for the hold duration, and says when it can hold again after a break', () => {
    const tracker = new CriteriaTracker([rule({ name: 'band', statistic: 'range', holdSeconds: 5 })]);
    const spikeAt = 20;
    const value = (t: number) => (t === spikeAt ? 12 : 10);
    const first = feed(tracker, 0, 14, 1, value);
    expect(first).toEqual([]);
    let s = tracker.state('band')!;
    expect(s.met).toBe(true);
    expect(s.since).toBe(T0 + 10); // the window covers 10 s from the first sample at 0
    expect(s.holdsFrom).toBe(T0 + 15);
    expect(s.secondsToHold).toBe(1);
    expect(s.pending).toMatch(/^met since/);
    const held = feed(tracker, 15, 19, 1, value);
    expect(held).toEqual([{ kind: 'criterion-holds', at: 15, time: T0 + 15, rule: 'band', since: T0 + 10, value: 0, tolerance: 1, margin: 1 }]);
    const lost = feed(tracker, 20, 20, 1, value);
    expect(lost).toEqual([{ kind: 'criterion-lost', at: 20, time: T0 + 20, rule: 'band', heldSince: T0 + 10, value: 2, tolerance: 1, margin: -1, reason: '2 exceeds the tolerance 1' }]);
    s = tracker.state('band')!;
    expect(s.holds).toBe(false);
    expect(s.since).toBeNull();
    // At the earliest the level stays at 12: the last reading at 10 (19 s) leaves the 10 s window
    // after 29 s, then 5 s of hold.
    expect(s.earliestHoldTime).toBe(T0 + 34);
    const again = feed(tracker, 21, 40, 1, value);
    const holdsAgain = again.find((e) => e.kind === 'criterion-holds')!;
    expect(holdsAgain.time).toBeGreaterThanOrEqual(s.earliestHoldTime!);
    expect(holdsAgain.time).toBe(T0 + 36); // back at 10: the first window without the spike is at 31 s
  });

  it('keeps the smallest margin since the condition became met as evidence', () => {
    const tracker = new CriteriaTracker([rule({ name: 'band', statistic: 'range', window: { kind: 'readings', readings: 3 } })]);
    feed(tracker, 0, 10, 1, (t) => (t === 5 ? 10.8 : t === 8 ? 10.3 : 10));
    const s = tracker.state('band')!;
    expect(s.holds).toBe(true);
    expect(s.worstMargin).toBeCloseTo(0.2, 12); // the window with 10.8
    expect(s.margin).toBeCloseTo(0.7, 12); // the window 10.3, 10, 10
  });

  it('takes the set point of the test point from the next sample on', () => {
    const spec = rule({ name: 'at-point', statistic: 'mean-deviation', setPoint: { kind: 'test-point' }, tolerance: { absolute: 0.5, relative: null, relativeTo: 'reading', zero: 0 }, minReadings: 1 });
    const tracker = new CriteriaTracker([spec]);
    feed(tracker, 0, 12, 1, () => 40);
    expect(tracker.state('at-point')!.pending).toBe('no set point from the test point');
    tracker.setSetPoint(40.2);
    expect(tracker.state('at-point')!.holds).toBe(false); // not before a sample
    const events = feed(tracker, 13, 13, 1, () => 40);
    expect(events.map((e) => e.kind)).toEqual(['criterion-holds']);
    expect(tracker.state('at-point')!.value).toBeCloseTo(0.2, 12);
    tracker.setSetPoint(41);
    expect(feed(tracker, 14, 14, 1, () => 40).map((e) => e.kind)).toEqual(['criterion-lost']);
  });

  it('restart forgets every reading and reports the rules that held as lost', () => {
    const tracker = new CriteriaTracker([rule({ name: 'band', statistic: 'range' })]);
    feed(tracker, 0, 12, 1, () => 10);
    expect(tracker.allHold).toBe(true);
    const events = tracker.restart();
    expect(events).toEqual([{ kind: 'criterion-lost', at: 13, time: T0 + 12, rule: 'band', heldSince: T0 + 10, value: 0, tolerance: 1, margin: 1, reason: 'restarted' }]);
    expect(tracker.allHold).toBe(false);
    feed(tracker, 13, 22, 1, () => 10);
    expect(tracker.state('band')!.holds).toBe(false); // the window covers 9 s since the restart
    feed(tracker, 23, 23, 1, () => 10);
    expect(tracker.state('band')!.holds).toBe(true);
  });

  it('takes a late sample at the newest time, ignores non-finite ones, and counts both', () => {
    const tracker = new CriteriaTracker([rule({ name: 'band', statistic: 'range' })]);
    tracker.push(10, T0 + 5);
    tracker.push(10.5, T0 + 3);
    tracker.push(Number.NaN, T0 + 6);
    tracker.push(10, Number.POSITIVE_INFINITY);
    expect(tracker.late).toBe(1);
    expect(tracker.ignored).toBe(2);
    expect(tracker.totalReceived).toBe(4);
    expect(tracker.state('band')!.detail.firstTime).toBe(T0 + 5);
    expect(tracker.state('band')!.value).toBeCloseTo(0.5, 12);
  });

  it('refuses unusable rules and repeated names, naming them', () => {
    expect(() => new CriteriaTracker([rule({ name: 'a', statistic: 'range', window: { kind: 'seconds', seconds: -1 } })])).toThrow(/a: windowSeconds/);
    expect(() => new CriteriaTracker([rule({ name: 'a', statistic: 'range' }), rule({ name: 'a', statistic: 'sd' })])).toThrow(/a: the name is used twice/);
  });

  it('rules sharing a window give the same results as rules alone, and equal a naive recomputation', () => {
    const specs = [
      rule({ name: 'range', statistic: 'range', tolerance: { absolute: 3, relative: null, relativeTo: 'reading', zero: 0 } }),
      rule({ name: 'deviation', statistic: 'deviation', tolerance: { absolute: 1.5, relative: null, relativeTo: 'reading', zero: 0 } }),
      rule({ name: 'sd', statistic: 'sd' }),
      rule({ name: 'slope', statistic: 'slope', tolerance: { absolute: 0.2, relative: null, relativeTo: 'reading', zero: 0 }, minReadings: 3 }),
      rule({ name: 'change', statistic: 'change', lag: 3, minReadings: 4, tolerance: { absolute: 2, relative: null, relativeTo: 'reading', zero: 0 } }),
    ];
    fc.assert(
      fc.property(fc.array(fc.integer({ min: -3, max: 3 }), { minLength: 5, maxLength: 120 }), fc.array(fc.constantFrom(0.25, 0.5, 1, 2), { minLength: 120, maxLength: 120 }), (values, steps) => {
        const together = new CriteriaTracker(specs);
        const alone = specs.map((s) => new CriteriaTracker([s]));
        const times: number[] = [];
        let t = T0;
        values.forEach((v, i) => {
          t += steps[i] as number;
          times.push(t);
          const a = together.push(v, t);
          const b = alone.flatMap((tr) => tr.push(v, t));
          expect(a).toEqual(b);
          const states = together.states();
          states.forEach((s, k) => expect(s).toEqual(alone[k]!.states()[0]));
          const x = pick(values, windowIndices(times, i, { kind: 'seconds', seconds: 10 }));
          if (x.length >= 2) {
            expect(states[0]!.value).toBe(naiveMax(x) - naiveMin(x));
            const mean = naiveMean(x);
            expect(states[1]!.value).toBeCloseTo(Math.max(naiveMax(x) - mean, mean - naiveMin(x)), 9);
          }
        });
      }),
      { numRuns: 60 },
    );
  });

  it('a restored state continues exactly as the uninterrupted tracker, and a state of other rules is refused', () => {
    const specs = [
      rule({ name: 'range', statistic: 'range', tolerance: { absolute: 4, relative: null, relativeTo: 'reading', zero: 0 }, holdSeconds: 3 }),
      rule({ name: 'avg', statistic: 'average-change', basis: { kind: 'averages', seconds: 2 }, window: { kind: 'seconds', seconds: 12 }, tolerance: { absolute: 2, relative: null, relativeTo: 'reading', zero: 0 } }),
      rule({ name: 'sampled', statistic: 'change', basis: { kind: 'sampled', seconds: 3 }, window: { kind: 'readings', readings: 3 }, minReadings: 2, direction: 'rise', tolerance: { absolute: 1, relative: null, relativeTo: 'reading', zero: 0 } }),
      rule({ name: 'slope', statistic: 'slope', tolerance: { absolute: 0.5, relative: 0.01, relativeTo: 'setpoint', zero: 0 }, setPoint: { kind: 'test-point' }, minReadings: 3 }),
      rule({ name: 'cv', statistic: 'cv', window: { kind: 'readings', readings: 8 }, tolerance: { absolute: 0.2, relative: null, relativeTo: 'reading', zero: 0 } }),
    ];
    fc.assert(
      fc.property(
        fc.array(fc.tuple(fc.integer({ min: 5, max: 12 }), fc.constantFrom(0, 0.3, 0.5, 1, 4)), { minLength: 2, maxLength: 150 }),
        fc.nat(),
        fc.option(fc.integer({ min: 5, max: 12 })),
        (samples, cut, setPoint) => {
          const split = cut % samples.length;
          const straight = new CriteriaTracker(specs, { setPoint });
          const first = new CriteriaTracker(specs, { setPoint });
          let t = T0;
          const times = samples.map(([, dt]) => (t += dt));
          const straightEvents = samples.flatMap(([v], i) => straight.push(v, times[i] as number));
          const before = samples.slice(0, split).flatMap(([v], i) => first.push(v, times[i] as number));
          // Structured clone stands for the checkpoint's v8.serialize round trip.
          const saved = structuredClone(first.saveState());
          expect(saved.version).toBe(CRITERIA_STATE_VERSION);
          const second = new CriteriaTracker(specs);
          expect(second.loadState(saved)).toBe(true);
          const after = samples.slice(split).flatMap(([v], i) => second.push(v, times[split + i] as number));
          expect([...before, ...after]).toEqual(straightEvents);
          expect(second.states()).toEqual(straight.states());
          expect(new CriteriaTracker(specs.slice(1)).loadState(saved)).toBe(false);
          expect(second.loadState({ ...saved, version: CRITERIA_STATE_VERSION + 1 })).toBe(false);
        },
      ),
      { numRuns: 150 },
    );
  });

  it('reading the live state never changes what the tracker does', () => {
    const specs = [rule({ name: 'range', statistic: 'range' }), rule({ name: 'slope', statistic: 'slope', minReadings: 3 })];
    const quiet = new CriteriaTracker(specs);
    const noisy = new CriteriaTracker(specs);
    for (let i = 0; i < 500; i++) {
      const v = Math.sin(i / 7) * (i > 250 ? 2 : 0.3);
      const a = quiet.push(v, T0 + i * 0.5);
      noisy.states();
      const b = noisy.push(v, T0 + i * 0.5);
      expect(b).toEqual(a);
    }
    expect(noisy.states()).toEqual(quiet.states());
  });

  it('a rule on readings taken at an interval is evaluated on those readings only, and waits for the next one', () => {
    const tracker = new CriteriaTracker([
      rule({ name: 'no-rise', statistic: 'change', basis: { kind: 'sampled', seconds: 900 }, window: { kind: 'readings', readings: 3 }, direction: 'rise', minReadings: 3, tolerance: { absolute: 0, relative: null, relativeTo: 'reading', zero: 0 } }),
    ]);
    // Readings at 0, 900 and 1800 s: 70.0, 70.4, 70.4 (a rise of 0.4, then none) with noise between.
    feed(tracker, 0, 1800, 10, (t) => (t === 0 ? 70 : t < 900 ? 75 : t === 900 ? 70.4 : t < 1800 ? 60 : 70.4));
    let s = tracker.state('no-rise')!;
    expect(s.value).toBeCloseTo(0.4, 12);
    expect(s.holds).toBe(false);
    // The rise leaves with the reading at 0 s; the next reading is due at 2700 s.
    expect(s.earliestHoldTime).toBe(T0 + 2700);
    feed(tracker, 1810, 2700, 10, (t) => (t === 2700 ? 70.3 : 99));
    s = tracker.state('no-rise')!;
    expect(s.value).toBe(0); // 70.4 -> 70.4 -> 70.3: no upward change
    expect(s.holds).toBe(true);
  });
});
