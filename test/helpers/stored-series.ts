import type { Store } from '../../src/ports/store.js';

/**
 * A channel's stored samples in order, with a check that the sample indices run 0, 1, 2, ... with
 * no gap and no repeat (a gap is a lost sample, a repeat a doubled one).
 */
export function storedSeries(store: Store, channel: string): { values: number[]; times: number[]; contiguous: boolean } {
  const values: number[] = [];
  const times: number[] = [];
  let contiguous = true;
  for (const chunk of store.samplesFrom(channel, 0)) {
    if (chunk.firstSeq !== values.length) contiguous = false;
    for (let i = 0; i < chunk.values.length; i++) {
      values.push(chunk.values[i] as number);
      times.push(chunk.times[i] as number);
    }
  }
  return { values, times, contiguous };
}
