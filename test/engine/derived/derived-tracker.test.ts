import { describe, expect, it } from 'vitest';
import { compileDerivedSet } from '../../../src/engine/derived/expression-model.js';
import { DerivedEngine, type DerivedResultSpec, type DerivedSnapshot } from '../../../src/engine/derived/derived-engine.js';
import { DerivedTracker, type ChannelWindowView, type DerivedWindowSource } from '../../../src/engine/derived/derived-tracker.js';
import { SeededRandom } from '../../../src/core/random/seeded-random.js';
import { correlatedRows } from './correlated-channels.js';

// The tracker keeps a derived result in step with its input channels' windows: what it reports
// must equal a fresh engine fed with the samples in the common part of the windows, whatever the
// order and timing of the updates (that is what makes a daemon restart give the same result).

class FakeWindows implements DerivedWindowSource {
  readonly values = new Map<string, number[]>();
  readonly times = new Map<string, number[]>();
  readonly first = new Map<string, number>();
  sliding = false;
  push(name: string, time: number, value: number): void {
    if (!this.values.has(name)) {
      this.values.set(name, []);
      this.times.set(name, []);
      this.first.set(name, 0);
    }
    (this.values.get(name) as number[]).push(value);
    (this.times.get(name) as number[]).push(time);
  }
  window(name: string): ChannelWindowView | null {
    const values = this.values.get(name);
    const times = this.times.get(name) as number[];
    if (values === undefined) return null;
    return { firstIndex: this.first.get(name) as number, nextIndex: values.length, valueAt: (i) => values[i] as number, timeAt: (i) => times[i] as number, sliding: this.sliding, steadyAt: () => true };
  }
}

const NAMES = ['a', 'b', 'c'];
const specs: DerivedResultSpec[] = compileDerivedSet([{ name: 'L', expression: 'a - b + 0.5 * c' }, { name: 'N', expression: 'a * (b - c)' }], NAMES.map((name) => ({ name })), 'derived').map((compiled) => ({ compiled, target: null, confidence: 0.95 }));

/** A fresh engine on the samples of the common part of the windows (the definition). */
function fromScratch(source: FakeWindows): DerivedSnapshot[] {
  const start = Math.max(...NAMES.map((n) => (source.times.get(n) as number[])[source.first.get(n) as number] as number));
  const engine = new DerivedEngine(specs, { startSeconds: start });
  const order: [number, number, number][] = [];
  NAMES.forEach((name, c) => {
    const times = source.times.get(name) as number[];
    const values = source.values.get(name) as number[];
    for (let i = source.first.get(name) as number; i < times.length; i++) order.push([times[i] as number, c, values[i] as number]);
  });
  order.sort((x, y) => x[0] - y[0] || x[1] - y[1]);
  for (const [t, c, v] of order) engine.add(c, t, v);
  return engine.evaluate();
}

function fill(source: FakeWindows, columns: Float64Array[], from: number, to: number, t0 = 1_764_000_000): void {
  for (let i = from; i < to; i++) NAMES.forEach((name, c) => source.push(name, t0 + i * 0.1, (columns[c] as Float64Array)[i] as number));
}

describe('DerivedTracker', () => {
  const columns = correlatedRows(new SeededRandom(99), 3000);

  it('syncing every few samples gives exactly what one sync at the end gives, and what a fresh engine on the windows gives', () => {
    const source = new FakeWindows();
    const live = new DerivedTracker(specs);
    const random = new SeededRandom(5);
    let done = 0;
    while (done < 3000) {
      const step = 1 + random.integer(40);
      fill(source, columns, done, Math.min(3000, done + step));
      done = Math.min(3000, done + step);
      live.sync(source);
    }
    const late = new DerivedTracker(specs);
    late.sync(source);
    expect(live.evaluate()).toEqual(late.evaluate());
    expect(live.evaluate()).toEqual(fromScratch(source));
    expect(live.rebuildCount).toBe(1);
  });

  it('a truncation of one input (warm-up cut) moves the common start: the engine is rebuilt and equals a fresh one', () => {
    const source = new FakeWindows();
    const live = new DerivedTracker(specs);
    fill(source, columns, 0, 1200);
    live.sync(source);
    source.first.set('b', 300); // b's warm-up ends at sample 300
    fill(source, columns, 1200, 2000);
    live.sync(source);
    expect(live.rebuildCount).toBe(2);
    const snapshot = live.evaluate()[0] as DerivedSnapshot;
    expect(snapshot.window?.startSeconds).toBeCloseTo(1_764_000_000 + 30, 6);
    expect(live.evaluate()).toEqual(fromScratch(source));
  });

  it('restart: the window begins at each input\'s next sample', () => {
    const source = new FakeWindows();
    const live = new DerivedTracker(specs);
    fill(source, columns, 0, 1000);
    live.sync(source);
    live.restart(source);
    expect((live.evaluate(source)[0] as DerivedSnapshot).notes.join(' ')).toMatch(/no samples in the window yet from a, b, c/);
    fill(source, columns, 1000, 2500);
    live.sync(source);
    for (const name of NAMES) source.first.set(name, 1000);
    expect(live.evaluate()).toEqual(fromScratch(source));
    expect(live.barriers()).toEqual([1000, 1000, 1000]);
  });

  it('a sliding window is followed within 1/16 of its rows, with few rebuilds', () => {
    const source = new FakeWindows();
    source.sliding = true;
    const live = new DerivedTracker(specs);
    for (let i = 0; i < 3000; i += 10) {
      fill(source, columns, i, i + 10);
      for (const name of NAMES) source.first.set(name, Math.max(0, i + 10 - 600)); // the last 600 samples
      live.sync(source);
    }
    const exact = fromScratch(source)[0] as DerivedSnapshot;
    const followed = live.evaluate()[0] as DerivedSnapshot;
    expect(followed.rows).toBeGreaterThanOrEqual(exact.rows);
    expect(followed.rows).toBeLessThanOrEqual(Math.ceil(exact.rows * (1 + 1 / 16)) + 1);
    // About one rebuild per 600/16 samples of slide (2400 samples of slide: about 65), not one per sync (300).
    expect(live.rebuildCount).toBeLessThan(100);
  });
});
