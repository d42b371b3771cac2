import { describe, expect, it } from 'vitest';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { deserialize, serialize } from 'node:v8';
import { Channel, type ChannelHistory } from '../../src/engine/channel.js';
import { ChannelPipeline } from '../../src/engine/channel-pipeline.js';
import { DEFAULT_CHANNEL_OPTIONS, type ChannelOptions } from '../../src/engine/channel-options.js';
import { decideCheckpoint, shapingFingerprint } from '../../src/engine/channel-state.js';
import { lcgAr1 } from '../helpers/lcg-series.js';
import { ROOT } from '../helpers/reference.js';

// Checkpoints are named, versioned records with the fingerprint of the options they were built
// under; a checkpoint of an earlier engine's layout is replayed, one made under other options (or of a version
// this plateau does not know, or unreadable) is set aside and the channel replayed from its stored
// samples, and the restore says which.

const T0 = 1_790_000_000;
const N = 6000;
const CHECKPOINT_AT = 4500;
const RESTART_AT = 2500;
/** The options and samples of test/fixtures/checkpoints/make-v1-checkpoint.mjs. */
const OPTIONS: ChannelOptions = { ...DEFAULT_CHANNEL_OPTIONS, target: { value: 0.002, relative: false, on: 'U' } };
const VALUES = Array.from(lcgAr1(11, 0.7, N), (x, i) => 20 + 0.05 * x + (i < 400 ? 0.3 : 0));

/** The store of a channel fed VALUES live, with the window restarted at RESTART_AT. */
function live(options: ChannelOptions = OPTIONS, count = N): { channel: Channel; history: ChannelHistory } {
  const channel = new Channel('fixture.loop_degC', 'degC', options);
  const marks: { seq: number; kind: string }[] = [];
  for (let i = 0; i < count; i++) {
    if (i === RESTART_AT) marks.push(channel.restartWindow());
    channel.accept(VALUES[i] as number, (T0 + i * 0.1) * 1000, true);
  }
  const times = VALUES.slice(0, count).map((_, i) => (T0 + i * 0.1) * 1000);
  return {
    channel,
    history: {
      samplesFrom: (seq) => [{ firstSeq: seq, times: times.slice(seq), values: VALUES.slice(seq, count), unstamped: null }],
      marksFrom: (seq) => marks.filter((m) => m.seq >= seq),
    },
  };
}

/** Every object in the record tree that carries state names itself and its version; no positional arrays of numbers. */
function expectNamedRecords(value: unknown, path = 'checkpoint'): void {
  if (value === null || typeof value !== 'object' || ArrayBuffer.isView(value)) return;
  if (Array.isArray(value)) {
    value.forEach((item, i) => expectNamedRecords(item, `${path}[${i}]`));
    return;
  }
  const object = value as Record<string, unknown>;
  expect(Object.keys(object), path).not.toContain('numbers');
  expect(Object.keys(object), path).not.toContain('flags');
  expect(Object.keys(object), path).not.toContain('counters');
  for (const [key, child] of Object.entries(object)) expectNamedRecords(child, `${path}.${key}`);
}

describe('channel checkpoints', () => {
  it('are named, versioned records with named fields and the fingerprint of the options that shape the state', () => {
    const { channel } = live();
    const { seq, state } = channel.checkpoint();
    expect(seq).toBe(N);
    expect(state).toMatchObject({ record: 'channel', version: 3, criteria: null, windows: { attached: [], forks: [] }, fingerprint: shapingFingerprint(OPTIONS), seqOffset: 0, pipeline: { record: 'channel-pipeline', version: 3 } });
    expect(state.pipeline.history).toMatchObject({ record: 'block-history', version: 1 });
    expect(state.pipeline.series).toMatchObject({ record: 'windowed-series', version: 1, ring: { record: 'sample-ring' }, moments: { record: 'shifted-moments' }, lags: { record: 'lagged-products' }, pyramid: { record: 'block-pyramid' } });
    expect(state.pipeline.monitor).toMatchObject({ record: 'stationarity-monitor', version: 1 });
    expect(state.options.estimator).toBe('auto');
    expectNamedRecords(state);
  });

  it('loaded back (through v8, as stored) a channel continues bit for bit', () => {
    const first = live(OPTIONS, CHECKPOINT_AT);
    const checkpoint = deserialize(serialize(first.channel.checkpoint())) as { seq: number; state: unknown };
    const full = live();
    const restored = new Channel('fixture.loop_degC', 'degC', OPTIONS);
    expect(restored.restore(checkpoint, full.history)).toEqual({ outcome: 'loaded', detail: null, replayed: N - CHECKPOINT_AT, forced: 0 });
    expect(restored.pipeline.snapshot()).toEqual(full.channel.pipeline.snapshot());
    expect(restored.checkpoint()).toEqual(full.channel.checkpoint());
  });

  it('a channel record of version 1 (before the stability rules) loads as it is for a channel without rules', () => {
    const first = live(OPTIONS, CHECKPOINT_AT);
    const { criteria: _none, ...rest } = first.channel.checkpoint().state;
    const checkpoint = { seq: CHECKPOINT_AT, state: { ...rest, version: 1 } };
    const full = live();
    const restored = new Channel('fixture.loop_degC', 'degC', OPTIONS);
    expect(restored.restore(checkpoint, full.history)).toEqual({ outcome: 'loaded', detail: null, replayed: N - CHECKPOINT_AT, forced: 0 });
    expect(restored.pipeline.snapshot()).toEqual(full.channel.pipeline.snapshot());
  });

  it('a loader refuses a record of another name or version instead of casting it', () => {
    const { channel } = live(OPTIONS, 500);
    const state = channel.pipeline.saveState();
    const pipeline = new ChannelPipeline('x', OPTIONS);
    expect(() => pipeline.loadState({ ...state, version: 4 } as never)).toThrow(/expected a channel-pipeline record of version 3, found channel-pipeline version 4/);
    expect(() => pipeline.loadState({ ...state, series: { ...state.series, moments: [1, 2, 3, 4, 5] } } as never)).toThrow(/expected a shifted-moments record of version 1, found no named record/);
  });

  it('a checkpoint of the first releases (version 1, positional; written by commit 4b78c9c) is set aside, the log says why, and the replay gives exactly an uninterrupted run', () => {
    // test/fixtures/checkpoints/make-v1-checkpoint.mjs wrote it with the old code. Its phase, warm-up
    // cut and detector state are the decisions of the engine before the verdict's warm-up fit, which
    // no change of layout turns into this engine's: the channel is replayed from its stored samples.
    const fixture = deserialize(readFileSync(join(ROOT, 'test', 'fixtures', 'checkpoints', 'pipeline-v1.v8'))) as { seq: number; state: { numbers: number[] } };
    expect(fixture.seq).toBe(CHECKPOINT_AT);
    expect(Array.isArray(fixture.state.numbers)).toBe(true);
    expect(decideCheckpoint(fixture.state, OPTIONS)).toEqual({ action: 'replay', reason: expect.stringMatching(/earlier engine \(channel-pipeline version 1, positional; this plateau writes version 3\)/) });
    const full = live();
    const restored = new Channel('fixture.loop_degC', 'degC', OPTIONS);
    const report = restored.restore(fixture, full.history);
    expect(report.outcome).toBe('replayed');
    expect(report.detail).toMatch(/^the checkpoint was made by an earlier engine/);
    expect(report.replayed).toBe(N);
    expect(restored.pipeline.snapshot()).toEqual(full.channel.pipeline.snapshot());
    expect(restored.checkpoint()).toEqual(full.channel.checkpoint());
  });

  it('a channel record holding a pipeline record of version 2 (the named layout before the verdict engine) is replayed, and the log says why', () => {
    const first = live(OPTIONS, CHECKPOINT_AT);
    const checkpoint = first.channel.checkpoint();
    const full = live();
    const restored = new Channel('fixture.loop_degC', 'degC', OPTIONS);
    const report = restored.restore({ ...checkpoint, state: { ...checkpoint.state, pipeline: { ...checkpoint.state.pipeline, version: 2 } as never } }, full.history);
    expect(report).toMatchObject({ outcome: 'replayed', replayed: N });
    expect(report.detail).toMatch(/earlier engine \(channel-pipeline version 2; this plateau writes version 3\), whose warm-up and break decisions this one does not share/);
    expect(restored.pipeline.snapshot()).toEqual(full.channel.pipeline.snapshot());
  });

  it('made under other shaping options it is set aside, the channel replayed from its samples, and the restore says why', () => {
    const first = live(OPTIONS, CHECKPOINT_AT);
    const sokal: ChannelOptions = { ...OPTIONS, estimator: 'sokal' };
    const full = live(sokal);
    const restored = new Channel('fixture.loop_degC', 'degC', sokal);
    const report = restored.restore(first.channel.checkpoint(), full.history);
    expect(report.outcome).toBe('replayed');
    expect(report.detail).toBe('the checkpoint was made under other options (estimator)');
    expect(report.replayed).toBe(N);
    expect(restored.pipeline.snapshot()).toEqual(full.channel.pipeline.snapshot());
  });

  it('made under options that only read the state (a new target) it is kept and carried over, and the restore says so', () => {
    const first = live(OPTIONS, CHECKPOINT_AT);
    const tighter: ChannelOptions = { ...OPTIONS, target: { value: 0.001, relative: false, on: 'U' } };
    const restored = new Channel('fixture.loop_degC', 'degC', tighter);
    const report = restored.restore(first.channel.checkpoint(), live(tighter).history);
    expect(report.outcome).toBe('loaded');
    expect(report.detail).toBe('carried over to the changed options target');
    expect(report.replayed).toBe(N - CHECKPOINT_AT);
  });

  it('of a version this plateau does not know, or unreadable, it is set aside and the channel replayed', () => {
    const first = live(OPTIONS, CHECKPOINT_AT);
    const full = live();
    const checkpoint = first.channel.checkpoint();
    const newer = new Channel('fixture.loop_degC', 'degC', OPTIONS);
    const r1 = newer.restore({ ...checkpoint, state: { ...checkpoint.state, version: 4 } }, full.history);
    expect(r1).toMatchObject({ outcome: 'replayed', detail: 'the checkpoint is a channel record of version 4, which this plateau does not know (it knows versions 1 to 3)', replayed: N });
    const broken = new Channel('fixture.loop_degC', 'degC', OPTIONS);
    const r2 = broken.restore({ ...checkpoint, state: { ...checkpoint.state, pipeline: { ...checkpoint.state.pipeline, series: { record: 'windowed-series', version: 9 } } } }, full.history);
    expect(r2.outcome).toBe('replayed');
    expect(r2.detail).toMatch(/^the checkpoint could not be read \(expected a windowed-series record of version 1/);
    for (const channel of [newer, broken]) expect(channel.pipeline.snapshot()).toEqual(full.channel.pipeline.snapshot());
  });
});
