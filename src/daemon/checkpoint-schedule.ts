import type { Channel } from '../engine/channel.js';
import type { PendingBatch } from './pending-batch.js';

/**
 * When a channel's checkpoint falls due: after `checkpointSamples` samples or two window lengths
 * since its last one, whichever is more (a replay after a restart then costs at most that many
 * samples), and for every channel with new samples at a clean stop. Only channels that took samples
 * since the last commit are looked at.
 */
export class CheckpointSchedule {
  private readonly last = new Map<string, number>();
  private readonly checkpointSamples: number;

  constructor(checkpointSamples: number) {
    this.checkpointSamples = checkpointSamples;
  }

  /** The channel has a stored checkpoint at this index. */
  stored(channel: string, seq: number): void {
    this.last.set(channel, seq);
  }

  /** Adds the checkpoints due among `channels` to the batch. */
  addDue(channels: Iterable<Channel>, batch: PendingBatch, final: boolean): void {
    for (const channel of channels) {
      const next = channel.nextSeq;
      const last = this.last.get(channel.name) ?? 0;
      const due = Math.max(this.checkpointSamples, 2 * channel.pipeline.count);
      if ((final && next > last) || next - last >= due) {
        batch.setCheckpoint({ channel: channel.name, ...channel.checkpoint() });
        this.last.set(channel.name, next);
      }
    }
  }
}
