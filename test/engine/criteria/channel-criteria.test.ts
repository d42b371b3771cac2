import { describe, expect, it } from 'vitest';
import { deserialize, serialize } from 'node:v8';
import { Channel, type StoredSamples } from '../../../src/engine/channel.js';
import { ChannelPipeline } from '../../../src/engine/channel-pipeline.js';
import { DEFAULT_CHANNEL_OPTIONS, type ChannelOptions } from '../../../src/engine/channel-options.js';
import { CriteriaTracker } from '../../../src/engine/criteria/criteria-tracker.js';
import { parseSetPointMark, setPointMark } from '../../../src/engine/criteria/set-point-mark.js';
import { SeededRandom } from '../../../src/core/random/seeded-random.js';
import type { CriterionSpec } from '../../../src/core/criteria/criterion-spec.js';
import type { ChannelEvent } from '../../../src/engine/channel-events.js';

// The stability rules run inside the channel's pipeline, on the same accept path as the
// statistics: the same events as a tracker fed alone, checkpointed with the channel, replayed with
// the test point's set point at the same sample. The checks are the engine's own definitions (no
// outside source); the rig (chiller loop CL-3) and its signal are invented.

const T0 = 1_790_000_000; // seconds

function spec(partial: Partial<CriterionSpec> & Pick<CriterionSpec, 'name' | 'statistic'>): CriterionSpec {
  return {
    basis: { kind: 'readings' },
    window: { kind: 'seconds', seconds: 120 },
    tolerance: { absolute: 0.5, relative: null, relativeTo: 'reading', zero: 0 },
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

const RULES: CriterionSpec[] = [
  spec({ name: 'band', statistic: 'range' }),
  spec({ name: 'on-set-point', statistic: 'setpoint-deviation', setPoint: { kind: 'test-point' }, tolerance: { absolute: 0.3, relative: null, relativeTo: 'reading', zero: 0 }, holdSeconds: 60 }),
  spec({ name: 'drift', statistic: 'slope', window: { kind: 'seconds', seconds: 300 }, perSeconds: 60, tolerance: { absolute: 0.05, relative: null, relativeTo: 'reading', zero: 0 }, comparison: 'less-than', minReadings: 3 }),
  spec({ name: 'averages', statistic: 'average-change', basis: { kind: 'averages', seconds: 30 }, window: { kind: 'seconds', seconds: 150 } }),
];

const OPTIONS: ChannelOptions = { ...DEFAULT_CHANNEL_OPTIONS, window: { kind: 'growing', maxSamples: 1 << 20 }, criteria: { policy: null, rules: RULES } };

/** A supply temperature settling from 12 to 7 degC at 1 Hz, with noise, then a step at 1500 s. */
function signal(n: number, seed = 11): { time: number; value: number }[] {
  const random = new SeededRandom(seed);
  const out: { time: number; value: number }[] = [];
  let noise = 0;
  for (let i = 0; i < n; i++) {
    noise = 0.7 * noise + 0.02 * random.normal();
    out.push({ time: T0 + i, value: 7 + 5 * Math.exp(-i / 120) + (i >= 1500 ? 0.8 : 0) + noise });
  }
  return out;
}

function criterionEvents(events: readonly ChannelEvent[]): ChannelEvent[] {
  return events.filter((e) => e.kind === 'criterion-holds' || e.kind === 'criterion-lost');
}

describe('stability rules in the channel pipeline', () => {
  it('raise the same events as a tracker fed alone, with the pipeline\'s sample index', () => {
    const samples = signal(2400);
    const pipeline = new ChannelPipeline('cl3.supply_degC', OPTIONS);
    const tracker = new CriteriaTracker(RULES);
    pipeline.setSetPoint(7);
    tracker.setSetPoint(7);
    const fromPipeline: ChannelEvent[] = [];
    const alone: unknown[] = [];
    for (const { time, value } of samples) {
      fromPipeline.push(...criterionEvents(pipeline.push(value, time)));
      alone.push(...tracker.push(value, time));
    }
    expect(fromPipeline.length).toBeGreaterThanOrEqual(8);
    expect(fromPipeline).toEqual(alone);
    // Every rule held before the step and lost it after.
    for (const name of ['band', 'on-set-point', 'drift', 'averages']) {
      const holds = fromPipeline.find((e) => e.kind === 'criterion-holds' && e.rule === name);
      const lost = fromPipeline.find((e) => e.kind === 'criterion-lost' && e.rule === name && e.at >= 1500);
      expect(holds?.at, name).toBeLessThan(1500);
      expect(lost?.at, name).toBeGreaterThanOrEqual(1500);
    }
    const snapshot = pipeline.snapshot();
    expect(snapshot.criteria).toEqual(tracker.states());
    expect(snapshot.readiness?.policy).toBe('both');
    const summary = pipeline.summary();
    expect(summary.criteria.map((c) => c.name)).toEqual(['band', 'on-set-point', 'drift', 'averages']);
    expect(summary.criteria[0]).toEqual({ name: 'band', holds: snapshot.criteria[0]!.holds, met: snapshot.criteria[0]!.met, since: snapshot.criteria[0]!.since, value: snapshot.criteria[0]!.value, tolerance: 0.5, margin: snapshot.criteria[0]!.margin, secondsToHold: snapshot.criteria[0]!.secondsToHold });
  });

  it('a channel without rules reports none and no readiness policy', () => {
    const pipeline = new ChannelPipeline('cl3.return_degC', DEFAULT_CHANNEL_OPTIONS);
    for (const { time, value } of signal(50)) pipeline.push(value, time);
    expect(pipeline.criteria).toBeNull();
    expect(pipeline.snapshot()).toMatchObject({ criteria: [], readiness: null });
    expect(pipeline.summary()).toMatchObject({ criteria: [], readyUnderPolicy: null });
  });

  it('the test point\'s set point is a mark replayed at its sample', () => {
    expect(setPointMark(7.25)).toBe('set-point:7.25');
    expect(setPointMark(null)).toBe('set-point:none');
    expect(parseSetPointMark(setPointMark(0.1 + 0.2))).toBe(0.1 + 0.2);
    expect(parseSetPointMark('set-point:none')).toBeNull();
    expect(parseSetPointMark('set-point:')).toBeUndefined();
    expect(parseSetPointMark('restart-window')).toBeUndefined();
    expect(new Channel('cl3.flow_kg_s', 'kg/s', DEFAULT_CHANNEL_OPTIONS).setSetPoint(1)).toBeNull();
  });
});

interface Log {
  samples: { seq: number; timeMs: number; value: number }[];
  marks: { seq: number; kind: string }[];
}

/** A live channel with a test point at 400 s (window restart, set point 7) and another at 1800 s (set point 7.8). */
function live(options: ChannelOptions, steps: number): { channel: Channel; log: Log; events: ChannelEvent[] } {
  const channel = new Channel('cl3.supply_degC', 'degC', options);
  const log: Log = { samples: [], marks: [] };
  const events: ChannelEvent[] = [];
  signal(steps).forEach(({ time, value }, i) => {
    if (i === 400 || i === 1800) {
      log.marks.push(channel.restartWindow());
      const mark = channel.setSetPoint(i === 400 ? 7 : 7.8);
      if (mark) log.marks.push(mark);
    }
    const result = channel.accept(value, time * 1000, true);
    if (!result.accepted) throw new Error('refused');
    log.samples.push({ seq: result.seq, timeMs: result.timeMs, value });
    events.push(...result.events);
  });
  return { channel, log, events };
}

function history(log: Log): { samplesFrom(seq: number): StoredSamples[]; marksFrom(seq: number): { seq: number; kind: string }[] } {
  const runs: StoredSamples[] = [];
  for (let i = 0; i < log.samples.length; i += 100) {
    const part = log.samples.slice(i, i + 100);
    runs.push({ firstSeq: part[0]!.seq, times: part.map((s) => s.timeMs), values: part.map((s) => s.value), unstamped: null });
  }
  return { samplesFrom: (seq) => runs.filter((r) => r.firstSeq + r.values.length > seq), marksFrom: (seq) => log.marks.filter((m) => m.seq >= seq) };
}

describe('stability rules across a restart', () => {
  const N = 2400;
  const CUT = 1000;

  it('replayed from the stored samples and marks, the rules end as the live ones, set point included', () => {
    const full = live(OPTIONS, N);
    expect(full.log.marks.map((m) => m.kind)).toEqual(['restart-window', 'set-point:7', 'restart-window', 'set-point:7.8']);
    const restored = new Channel('cl3.supply_degC', 'degC', OPTIONS);
    expect(restored.restore(null, history(full.log))).toMatchObject({ outcome: 'fresh', replayed: N });
    expect(restored.pipeline.criteria?.setPoint).toBe(7.8);
    expect(restored.pipeline.snapshot()).toEqual(full.channel.pipeline.snapshot());
  });

  it('loaded from a checkpoint (through v8) they continue bit for bit', () => {
    const full = live(OPTIONS, N);
    const first = live(OPTIONS, CUT);
    const checkpoint = deserialize(serialize(first.channel.checkpoint())) as { seq: number; state: { criteria: unknown } };
    expect(checkpoint.state.criteria).toMatchObject({ kind: 'plateau/criteria-tracker', version: 1 });
    const restored = new Channel('cl3.supply_degC', 'degC', OPTIONS);
    expect(restored.restore(checkpoint, history(full.log))).toEqual({ outcome: 'loaded', detail: null, replayed: N - CUT, forced: 0 });
    expect(restored.pipeline.snapshot()).toEqual(full.channel.pipeline.snapshot());
    expect(restored.checkpoint()).toEqual(full.channel.checkpoint());
  });

  it('changed rules, or a checkpoint from before the rules, mean a replay, and the restore says why', () => {
    const full = live(OPTIONS, N);
    const checkpoint = live(OPTIONS, CUT).channel.checkpoint();
    const changed: ChannelOptions = { ...OPTIONS, criteria: { policy: null, rules: RULES.map((r) => (r.name === 'band' ? { ...r, tolerance: { ...r.tolerance, absolute: 0.4 } } : r)) } };
    const other = new Channel('cl3.supply_degC', 'degC', changed);
    expect(other.restore(checkpoint, history(full.log))).toMatchObject({ outcome: 'replayed', detail: 'the stability rules changed since the checkpoint (or it holds no state of them)', replayed: N });
    const uninterrupted = live(changed, N);
    expect(other.pipeline.snapshot()).toEqual(uninterrupted.channel.pipeline.snapshot());

    const { criteria: _c, ...v1 } = checkpoint.state;
    const old = new Channel('cl3.supply_degC', 'degC', OPTIONS);
    expect(old.restore({ seq: CUT, state: { ...v1, version: 1 } }, history(full.log))).toMatchObject({
      outcome: 'replayed',
      detail: 'the checkpoint (channel record version 1) holds no state of the stability rules now configured',
      replayed: N,
    });
    expect(old.pipeline.snapshot()).toEqual(full.channel.pipeline.snapshot());
  });
});
