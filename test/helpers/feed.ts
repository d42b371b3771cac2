import { ChannelPipeline } from '../../src/engine/channel-pipeline.js';
import { DEFAULT_CHANNEL_OPTIONS, type ChannelOptions } from '../../src/engine/channel-options.js';

/**
 * Streams values through a channel pipeline (time = index) and returns it. The stationarity
 * detectors are off unless asked for: estimator tests want the statistics of every sample, without
 * a warm-up cut or a (rare, budgeted) false alarm restarting the window.
 */
export function feed(values: ArrayLike<number>, options: Partial<ChannelOptions> = {}): ChannelPipeline {
  const pipeline = new ChannelPipeline('test', { ...DEFAULT_CHANNEL_OPTIONS, detectors: false, ...options });
  for (let i = 0; i < values.length; i++) pipeline.push(values[i] as number, i);
  return pipeline;
}
