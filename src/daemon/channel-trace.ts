import type { Channel } from '../engine/channel.js';
import type { ChannelPipeline } from '../engine/channel-pipeline.js';
import type { ChannelTrace } from '../ports/daemon-api.js';
import type { Store } from '../ports/store.js';

/**
 * The recent samples of a channel for its chart, with the indices that mark where the averaging
 * window starts and where the warm-up was cut.
 *
 * The window holds only the samples being averaged: the warm-up (or the samples before a break)
 * is dropped from it. To show the cut, a trace that asks for more samples than the window holds
 * is completed from the store with the samples just before the window (the store keeps every
 * accepted sample until retention removes it). So a chart shows the warm-up and the cut while a
 * test point is young, and only the window once it is long.
 *
 * Indices are the channel's 0-based sample indices (the `at` of its events).
 *   originIndex   first sample of the current window run (the test point's start): for a growing
 *                 window the excluded samples lie between it and windowStartIndex
 *   windowStartIndex  first sample averaged now (the warm-up cut, or the change point of a break)
 * `pending`: the channel's samples not yet committed, read after the stored ones.
 * `pipeline`: the channel's own, or a test point's window over it (src/engine/channel.ts; its indices are the channel's).
 * Cost: O(count) from the window; reading the store scans the channel's chunk keys (SQLite), so it
 * happens only when the window holds fewer than `count` samples.
 */
export function channelTrace(store: Store | null, channel: Channel, count: number, pipeline: ChannelPipeline = channel.pipeline, pending: { firstSeq: number; times: ArrayLike<number>; values: ArrayLike<number> } | null = null): ChannelTrace {
  const window = pipeline.recentTrace(count);
  const windowStartIndex = window.values.length > 0 ? window.firstIndex : pipeline.totalReceived;
  const excluded = pipeline.options.window.kind === 'growing' ? pipeline.snapshot().excluded : 0;
  const originIndex = Math.max(0, windowStartIndex - excluded);
  const missing = count - window.values.length;
  const times: (number | null)[] = [];
  const values: number[] = [];
  let firstIndex = window.firstIndex;
  if (missing > 0 && windowStartIndex > 0 && store !== null) {
    const from = Math.max(0, windowStartIndex - missing);
    firstIndex = from;
    let expected = from;
    // Store indices are the pipeline's plus the channel's offset (not 0 only after a rebuild from a shortened history).
    const offset = channel.seqOffset;
    // The samples not yet committed follow the stored ones (a record made before the commit that holds them).
    const chunks = pending === null ? store.samplesFrom(channel.name, from + offset) : [...store.samplesFrom(channel.name, from + offset), pending];
    for (const chunk of chunks) {
      if (chunk.firstSeq - offset >= windowStartIndex) break;
      for (let i = 0; i < chunk.values.length; i++) {
        const seq = chunk.firstSeq - offset + i;
        if (seq < from) continue;
        if (seq >= windowStartIndex) break;
        // Retention may have removed samples: keep the indices honest by starting after the gap.
        if (seq !== expected) {
          times.length = 0;
          values.length = 0;
          firstIndex = seq;
        }
        const ms = chunk.times[i] as number;
        times.push(Number.isFinite(ms) ? ms / 1000 : null);
        values.push(chunk.values[i] as number);
        expected = seq + 1;
      }
    }
    // Samples not yet committed, or pruned: the trace then starts at the window.
    if (expected !== windowStartIndex) {
      times.length = 0;
      values.length = 0;
      firstIndex = window.firstIndex;
    }
  }
  const beforeWindow = values.length;
  for (let i = 0; i < window.values.length; i++) {
    times.push(window.times[i] ?? null);
    values.push(window.values[i] as number);
  }
  if (beforeWindow === 0) firstIndex = window.values.length > 0 ? window.firstIndex : windowStartIndex;
  return { firstIndex, times, values, windowStartIndex, originIndex, beforeWindow };
}
