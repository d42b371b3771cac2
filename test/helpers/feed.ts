import { ChannelPipeline } from '../../src/engine/channel-pipeline.js';
import { DEFAULT_CHANNEL_OPTIONS, type ChannelOptions } from '../../src/engine/channel-options.js';

/** Streams values through a channel pipeline (time = index) and returns it. */
export function feed(values: ArrayLike<number>, options: Partial<ChannelOptions> = {}): ChannelPipeline {
  const pipeline = new ChannelPipeline('test', { ...DEFAULT_CHANNEL_OPTIONS, ...options });
  for (let i = 0; i < values.length; i++) pipeline.push(values[i] as number, i);
  return pipeline;
}
