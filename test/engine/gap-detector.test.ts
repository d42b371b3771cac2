import { describe, expect, it } from 'vitest';
import { GapDetector, MAX_KEPT } from '../../src/engine/gap-detector.js';
import { SeededRandom } from '../../src/core/random/seeded-random.js';

// Gaps in a seeded stream with dropped samples (the drops are known, so every check is against the
// stream's own construction): every gap found with its length, none on time stamps jittered within
// tolerance (a quarter interval each); learned and configured intervals; sequence gaps.

interface Stream {
  times: number[];
  /** The runs dropped: [index of the sample before, run length]. */
  drops: { fromMs: number; toMs: number; missing: number }[];
}

function stream(seed: number, n: number, intervalMs: number, jitter: number, dropRate: number): Stream {
  const random = new SeededRandom(seed);
  const grid = (i: number) => 1_764_000_000_000 + i * intervalMs + (random.uniform() * 2 - 1) * jitter * intervalMs;
  const times: number[] = [];
  const drops: Stream['drops'] = [];
  let i = 0;
  let previous = grid(0);
  times.push(previous);
  i = 1;
  while (i < n) {
    if (i > 40 && random.uniform() < dropRate) {
      // A run of 1 to 50 samples never arrives (bursts more often short).
      const run = 1 + Math.floor(49 * random.uniform() ** 3);
      i += run;
      const next = grid(i);
      drops.push({ fromMs: previous, toMs: next, missing: run });
      times.push(next);
      previous = next;
    } else {
      previous = grid(i);
      times.push(previous);
    }
    i++;
  }
  return { times, drops };
}

describe('GapDetector', () => {
  it('a seeded stream at 100 Hz, time stamps jittered by up to 0.24 interval, 1 % of samples starting a dropped run: every gap with its length, no false gap', () => {
    for (const seed of [1, 2, 3]) {
      const { times, drops } = stream(seed, 100_000, 10, 0.24, 0.01);
      const detector = new GapDetector(null);
      const found = times.map((t) => detector.push(t)).filter((g) => g !== null);
      expect(drops.length).toBeGreaterThan(500);
      expect(found.map((g) => [g?.fromMs, g?.toMs, g?.missing])).toEqual(drops.map((d) => [d.fromMs, d.toMs, d.missing]));
      const stats = detector.stats();
      expect(stats.learned).toBe(true);
      expect(stats.intervalMs).toBeGreaterThan(9);
      expect(stats.intervalMs).toBeLessThan(11);
      expect(stats.missing).toBe(drops.reduce((sum, d) => sum + d.missing, 0));
    }
  });

  it('the same with the interval configured (no learning), and jitter alone never makes a gap', () => {
    const { times, drops } = stream(9, 50_000, 250, 0.24, 0.005);
    const configured = new GapDetector(250);
    expect(times.map((t) => configured.push(t)).filter((g) => g !== null).map((g) => g?.missing)).toEqual(drops.map((d) => d.missing));
    const clean = stream(10, 50_000, 250, 0.24, 0);
    const quiet = new GapDetector(null);
    for (const t of clean.times) expect(quiet.push(t)).toBeNull();
    expect(quiet.stats().gaps).toBe(0);
  });

  it('late and repeated time stamps are not steps; nothing is judged before 8 intervals are known', () => {
    const d = new GapDetector(null);
    expect([0, 10, 10, 5, 20, 100].map((t) => d.push(t))).toEqual([null, null, null, null, null, null]);
    const e = new GapDetector(null);
    for (let i = 0; i <= 8; i++) e.push(i * 10);
    expect(e.push(110)?.missing).toBe(2);
  });

  it('a channel that slows down is followed: the first slower steps count as gaps, then none', () => {
    const d = new GapDetector(null);
    let t = 0;
    for (let i = 0; i < 100; i++) d.push((t += 10));
    let gaps = 0;
    for (let i = 0; i < 200; i++) if (d.push((t += 20)) !== null) gaps++;
    expect(gaps).toBeGreaterThan(0);
    expect(gaps).toBeLessThanOrEqual(32);
    expect(d.stats().intervalMs).toBe(20);
    expect(d.push((t += 20))).toBeNull();
  });

  it('a sequence gap is counted once: the next step is not judged again', () => {
    const d = new GapDetector(100);
    d.push(0);
    d.push(100);
    const seq = d.noteSequenceGap(3, 500);
    expect(seq).toEqual({ fromMs: 100, toMs: 500, missing: 3, intervalMs: null, source: 'sequence' });
    expect(d.push(500)).toBeNull();
    expect(d.push(600)).toBeNull();
    expect(d.stats()).toMatchObject({ gaps: 1, missing: 3, sequenceGaps: 1 });
  });

  it('gaps within a window (a test point\'s), from the last MAX_KEPT', () => {
    const d = new GapDetector(10);
    let t = 0;
    d.push(t);
    for (let k = 0; k < 10; k++) {
      for (let i = 0; i < 5; i++) d.push((t += 10));
      d.push((t += 30)); // 2 missing
    }
    expect(d.within(0, t)).toMatchObject({ gaps: 10, missing: 20 });
    const w = d.within(200, 400);
    expect(w.list.every((g) => g.fromMs >= 200 && g.toMs <= 400)).toBe(true);
    expect(w.missing).toBe(2 * w.gaps);
    const many = new GapDetector(1);
    many.push(0);
    for (let k = 1; k <= MAX_KEPT + 10; k++) many.push(k * 3);
    expect(many.within(0, Infinity).gaps).toBe(MAX_KEPT);
    expect(many.stats().gaps).toBe(MAX_KEPT + 10);
  });
});
