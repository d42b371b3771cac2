import { describe, expect, it } from 'vitest';
import { deserialize, serialize } from 'node:v8';
import { Channel, type StoredSamples, type WindowMark } from '../../src/engine/channel.js';
import { DEFAULT_CHANNEL_OPTIONS, type ChannelOptions } from '../../src/engine/channel-options.js';
import { SeededRandom } from '../../src/core/random/seeded-random.js';
import type { CriterionSpec } from '../../src/core/criteria/criterion-spec.js';

// A test point's own window over a channel (src/engine/channel.ts): attached to the channel's
// pipeline until something else changes it, then forked. Each window must equal what the channel's
// pipeline would have been had only its test point started, live, after a checkpoint, and after a
// replay whatever order the store returns the marks of one index in. Series: a seeded AR(1) around
// a level that steps at each test point's start (invented; every check compares the engine with
// itself).

const T0 = 1_790_000_000; // seconds
const RULE: CriterionSpec = {
  name: 'on-set-point',
  statistic: 'setpoint-deviation',
  basis: { kind: 'readings' },
  window: { kind: 'seconds', seconds: 60 },
  tolerance: { absolute: 0.3, relative: null, relativeTo: 'reading', zero: 0 },
  comparison: 'at-most',
  setPoint: { kind: 'test-point' },
  minReadings: 2,
  holdSeconds: 30,
  lag: 1,
  direction: 'any',
  perSeconds: 1,
  preset: null,
  source: null,
  wording: null,
};
const OPTIONS: ChannelOptions = { ...DEFAULT_CHANNEL_OPTIONS, window: { kind: 'growing', maxSamples: 1 << 20 }, criteria: { policy: null, rules: [RULE] } };

interface Plan {
  /** At sample i: a test point starts (restart, set point, open), or stops (close). */
  starts: { at: number; id: string; setPoint: number }[];
  stops: { at: number; id: string }[];
}

interface Run {
  channel: Channel;
  samples: { seq: number; timeMs: number; value: number }[];
  marks: WindowMark[];
}

function value(i: number, random: SeededRandom, state: { noise: number }): number {
  state.noise = 0.6 * state.noise + 0.05 * random.normal();
  return 7 + (i >= 1500 ? 0.4 : 0) + state.noise;
}

/** The channel fed `n` samples at 1 Hz, with the starts and stops of `plan`. */
function run(n: number, plan: Plan, until = n, channel = new Channel('cl3.supply_degC', 'degC', OPTIONS)): Run {
  const random = new SeededRandom(17);
  const state = { noise: 0 };
  const samples: Run['samples'] = [];
  const marks: WindowMark[] = [];
  for (let i = 0; i < until; i++) {
    for (const stop of plan.stops) if (stop.at === i) {
      const mark = channel.closeWindow(stop.id);
      if (mark) marks.push(mark);
    }
    for (const start of plan.starts) if (start.at === i) {
      marks.push(channel.restartWindow());
      const setPoint = channel.setSetPoint(start.setPoint);
      if (setPoint) marks.push(setPoint);
      marks.push(channel.openWindow(start.id));
    }
    const v = value(i, random, state);
    const result = channel.accept(v, (T0 + i) * 1000, true);
    if (result.accepted) samples.push({ seq: result.seq, timeMs: result.timeMs, value: v });
  }
  return { channel, samples, marks };
}

function history(r: Run, reverse: boolean) {
  const runs: StoredSamples[] = [{ firstSeq: 0, times: r.samples.map((s) => s.timeMs), values: r.samples.map((s) => s.value), unstamped: null }];
  // The store returns a seq's marks in its own order (SQLite: by kind): both orders must give the same windows.
  const marks = [...r.marks].sort((a, b) => a.seq - b.seq || (reverse ? b.kind.localeCompare(a.kind) : a.kind.localeCompare(b.kind)));
  return {
    samplesFrom: (seq: number) => runs.map((x) => ({ ...x, firstSeq: x.firstSeq })).filter((x) => x.firstSeq + x.values.length > seq),
    marksFrom: (seq: number) => marks.filter((m) => m.seq >= seq),
  };
}

const N = 2400;
const ALONE: Plan = { starts: [{ at: 300, id: 'a', setPoint: 7 }], stops: [] };
const BOTH: Plan = { starts: [{ at: 300, id: 'a', setPoint: 7 }, { at: 1200, id: 'b', setPoint: 7.4 }], stops: [] };

describe("a test point's own window", () => {
  it('a later start on the channel forks the first window: it equals the one of the first test point alone, rules and set point included', () => {
    const alone = run(N, ALONE);
    const both = run(N, BOTH);
    const a = both.channel.windowOf('a');
    expect(a).not.toBe(both.channel.pipeline);
    expect(a?.snapshot()).toEqual(alone.channel.windowOf('a')?.snapshot());
    expect(a?.criteria?.setPoint).toBe(7);
    // B is the channel's pipeline (attached), started at its own sample with its own set point.
    expect(both.channel.windowOf('b')).toBe(both.channel.pipeline);
    expect(both.channel.pipeline.criteria?.setPoint).toBe(7.4);
    expect(both.channel.windowOf('b')?.snapshot().window.startIndex).toBeGreaterThanOrEqual(1200);
    // Alone, the test point's window is the channel's pipeline: nothing is copied.
    expect(alone.channel.windowOf('a')).toBe(alone.channel.pipeline);
  });

  it('closing a window drops it; an unknown test point has none', () => {
    const both = run(N, { ...BOTH, stops: [{ at: 2000, id: 'a' }] });
    expect(both.channel.windowOf('a')).toBeNull();
    expect(both.channel.windowIds()).toEqual(['b']);
    expect(both.channel.closeWindow('nobody')).toBeNull();
  });

  it('restored from every stored sample, marks in either order, and from a checkpoint (through v8) taken after the fork, the windows are the live ones', () => {
    const live = run(N, BOTH);
    for (const reverse of [false, true]) {
      const replayed = new Channel('cl3.supply_degC', 'degC', OPTIONS);
      replayed.restore(null, history(live, reverse));
      expect(replayed.windowIds().sort(), `reverse ${reverse}`).toEqual(['a', 'b']);
      for (const id of ['a', 'b']) expect(replayed.windowOf(id)?.snapshot(), `${id} reverse ${reverse}`).toEqual(live.channel.windowOf(id)?.snapshot());
    }
    // A checkpoint after B's start, then the rest of the stream.
    const partial = run(N, BOTH, 1800);
    const checkpoint = partial.channel.checkpoint();
    const loaded = new Channel('cl3.supply_degC', 'degC', OPTIONS);
    const report = loaded.restore({ seq: checkpoint.seq, state: deserialize(serialize(checkpoint.state)) }, history(partial, false));
    expect(report.outcome).toBe('loaded');
    const random = new SeededRandom(17);
    const state = { noise: 0 };
    for (let i = 0; i < N; i++) {
      const v = value(i, random, state);
      if (i >= 1800) loaded.accept(v, (T0 + i) * 1000, true);
    }
    for (const id of ['a', 'b']) expect(loaded.windowOf(id)?.snapshot(), id).toEqual(live.channel.windowOf(id)?.snapshot());
  });
});
