import { describe, expect, it } from 'vitest';
import { Channel, RECENT_TIMES, type StoredSamples } from '../../src/engine/channel.js';
import { DEFAULT_CHANNEL_OPTIONS, type ChannelOptions } from '../../src/engine/channel-options.js';
import { SeededRandom } from '../../src/core/random/seeded-random.js';

// A channel restored from what it handed out (its accepted samples with their stamp flags, its
// window marks, optionally a checkpoint) decides every later sample as the live one does: the
// replay goes through the same accept path.

const T0 = 1_790_000_000_000;
const OPTIONS: ChannelOptions = { ...DEFAULT_CHANNEL_OPTIONS, window: { kind: 'growing', maxSamples: 1 << 20 } };

interface Log {
  samples: { seq: number; timeMs: number; value: number; stamped: boolean }[];
  marks: { seq: number; kind: string }[];
}

/** A live channel fed a stream with late, repeated, out-of-order and arrival-stamped samples, and two window restarts. */
function live(steps: number, seed = 3): { channel: Channel; log: Log; verdicts: string[] } {
  const random = new SeededRandom(seed);
  const channel = new Channel('bath.ref_degC', 'degC', OPTIONS);
  const log: Log = { samples: [], marks: [] };
  const verdicts: string[] = [];
  let t = T0;
  let level = 25;
  for (let i = 0; i < steps; i++) {
    if (i === Math.floor(steps / 3) || i === Math.floor((2 * steps) / 3)) log.marks.push(channel.restartWindow());
    level = 25 + 0.8 * (level - 25) + 0.01 * random.normal();
    const draw = random.uniform();
    let time: number;
    let stamped = true;
    if (draw < 0.03 && t > T0 + 10_000) time = t - 100 * (1 + random.integer(40)) - (random.uniform() < 0.5 ? 37 : 0); // a repeat, or a late one
    else if (draw < 0.04) time = T0 - 1e9; // far too old
    else if (draw < 0.1) {
      time = t - 5000; // arrival-stamped, behind the last time
      stamped = false;
    } else time = t += 100;
    const result = channel.accept(level, time, stamped);
    verdicts.push(result.accepted ? (result.late ? 'late' : 'ok') : result.reason);
    if (result.accepted) log.samples.push({ seq: result.seq, timeMs: result.timeMs, value: level, stamped });
  }
  return { channel, log, verdicts };
}

/** The log as the store keeps it: runs of consecutive samples with an unstamped bitmap. */
function stored(log: Log, from = 0, run = 97): StoredSamples[] {
  const out: StoredSamples[] = [];
  const samples = log.samples.filter((s) => s.seq >= from);
  for (let i = 0; i < samples.length; i += run) {
    const part = samples.slice(i, i + run);
    let unstamped: Uint8Array | null = null;
    part.forEach((s, k) => {
      if (s.stamped) return;
      unstamped ??= new Uint8Array(Math.ceil(part.length / 8));
      unstamped[k >> 3] = (unstamped[k >> 3] as number) | (1 << (k & 7));
    });
    out.push({ firstSeq: (part[0] as { seq: number }).seq, times: part.map((s) => s.timeMs), values: part.map((s) => s.value), unstamped });
  }
  return out;
}

/** The store as a channel reads it at restart. */
function history(log: Log): { samplesFrom(seq: number): StoredSamples[]; marksFrom(seq: number): { seq: number; kind: string }[] } {
  return {
    samplesFrom: (seq) => stored(log).filter((run) => run.firstSeq + run.values.length > seq),
    marksFrom: (seq) => log.marks.filter((m) => m.seq >= seq),
  };
}

/** Both channels give the same verdict and index to every one of the same further samples. */
function expectSameDecisions(a: Channel, b: Channel): void {
  const probe = [a.lastTimeMs, a.lastTimeMs - 100, a.lastTimeMs - 1e9, a.lastTimeMs + 100, a.lastTimeMs + 50, a.lastTimeMs - 50];
  for (const time of probe) {
    const x = a.accept(25, time, true);
    const y = b.accept(25, time, true);
    expect(y.accepted).toBe(x.accepted);
    if (x.accepted && y.accepted) expect([y.seq, y.timeMs, y.late]).toEqual([x.seq, x.timeMs, x.late]);
    // The restored channel names a time older than what the store held 'redelivered' (a message
    // committed before the restart, delivered again), where the live one says 'out-of-order'.
    else if (!x.accepted && !y.accepted) expect(y.reason === 'redelivered' ? 'out-of-order' : y.reason).toBe(x.reason);
  }
}

describe('Channel', () => {
  it('the live stream exercises every verdict of the time policy', () => {
    const { verdicts } = live(30_000);
    for (const verdict of ['ok', 'late', 'duplicate', 'out-of-order']) expect(verdicts, verdict).toContain(verdict);
  });

  it('replayed from every stored sample, it ends where the live channel is and decides as it does', () => {
    const { channel, log } = live(30_000);
    const restored = new Channel(channel.name, channel.unit, OPTIONS);
    const result = restored.restore(null, history(log));
    expect(result).toEqual({ outcome: 'fresh', detail: null, replayed: log.samples.length, forced: 0 });
    expect(restored.nextSeq).toBe(channel.nextSeq);
    expect(restored.lastTimeMs).toBe(channel.lastTimeMs);
    expect(restored.pipeline.snapshot()).toEqual(channel.pipeline.snapshot());
    expectSameDecisions(channel, restored);
  });

  it('replayed from a checkpoint and the samples after it (the time policy refilled from those before), the same', () => {
    const { channel, log } = live(30_000);
    // A checkpoint taken mid-stream, by a channel fed the same samples up to there.
    const cut = 17_000;
    const before = new Channel(channel.name, channel.unit, OPTIONS);
    before.restore(null, history({ samples: log.samples.filter((s) => s.seq < cut), marks: log.marks.filter((m) => m.seq < cut) }));
    const checkpoint = before.checkpoint();
    expect(checkpoint.seq).toBe(cut);
    const restored = new Channel(channel.name, channel.unit, OPTIONS);
    // The store keeps only the samples from cut - RECENT_TIMES on (retention), which is enough.
    const result = restored.restore(checkpoint, history({ samples: log.samples.filter((s) => s.seq >= cut - RECENT_TIMES), marks: log.marks }));
    expect(result).toEqual({ outcome: 'loaded', detail: null, replayed: log.samples.length - cut, forced: 0 });
    expect(restored.pipeline.snapshot()).toEqual(channel.pipeline.snapshot());
    expectSameDecisions(channel, restored);
  });

  it('a stored sample the policy can no longer judge (retention took what it was judged against) is taken as before, and counted', () => {
    const channel = new Channel('probe', null, OPTIONS);
    const samples: Log['samples'] = [];
    for (let i = 0; i < 10; i++) {
      const r = channel.accept(i, T0 + 1000 * i, true);
      if (r.accepted) samples.push({ seq: r.seq, timeMs: r.timeMs, value: i, stamped: true });
    }
    const late = channel.accept(99, T0 + 500, true);
    expect(late).toMatchObject({ accepted: true, late: true });
    if (late.accepted) samples.push({ seq: late.seq, timeMs: late.timeMs, value: 99, stamped: true });
    // A replay without the first nine samples (retention took them): the late one now looks out of order.
    const restored = new Channel('probe', null, OPTIONS);
    const result = restored.restore(null, history({ samples: samples.slice(9), marks: [] }));
    expect(result).toMatchObject({ outcome: 'fresh', replayed: 2, forced: 1 });
    expect(result.detail).toMatch(/rebuilt from stored sample 9 on \(retention removed the earlier ones\)/);
    expect(restored.seqOffset).toBe(9);
    expect(restored.nextSeq).toBe(channel.nextSeq);
  });

  it('a window mark at the next sample (a test point started after the last stored sample) is applied at the end of the replay', () => {
    const channel = new Channel('probe', null, OPTIONS);
    for (let i = 0; i < 200; i++) channel.accept(Math.sin(i), T0 + 100 * i, true);
    const mark = channel.restartWindow();
    expect(mark).toEqual({ seq: 200, kind: 'restart-window' });
    const restored = new Channel('probe', null, OPTIONS);
    const samples = Array.from({ length: 200 }, (_, i) => ({ seq: i, timeMs: T0 + 100 * i, value: Math.sin(i), stamped: true }));
    restored.restore(null, history({ samples, marks: [mark] }));
    expect(restored.pipeline.count).toBe(0);
    expect(restored.pipeline.snapshot()).toEqual(channel.pipeline.snapshot());
  });

  it('after a restart, a sample older than every remembered time but no newer than the stored ones is a redelivery, not out of order', () => {
    const channel = new Channel('probe', null, OPTIONS);
    const samples: Log['samples'] = [];
    const n = RECENT_TIMES + 500;
    for (let i = 0; i < n; i++) {
      const r = channel.accept(Math.sin(i), T0 + 100 * i, true);
      if (r.accepted) samples.push({ seq: r.seq, timeMs: r.timeMs, value: Math.sin(i), stamped: true });
    }
    // The live channel: sample 3's time is older than every remembered one.
    expect(channel.accept(1, T0 + 300, true)).toEqual({ accepted: false, reason: 'out-of-order' });
    const restored = new Channel('probe', null, OPTIONS);
    restored.restore(null, history({ samples, marks: [] }));
    // The broker delivers sample 3 again after the restart: committed before, so a redelivery.
    expect(restored.accept(1, T0 + 300, true)).toEqual({ accepted: false, reason: 'redelivered' });
    // One of the remembered times is still a duplicate, and new samples are taken.
    expect(restored.accept(1, T0 + 100 * (n - 1), true)).toEqual({ accepted: false, reason: 'duplicate' });
    expect(restored.accept(1, T0 + 100 * n, true)).toMatchObject({ accepted: true });
  });
});
