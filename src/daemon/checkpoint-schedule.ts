import type { Channel } from '../engine/channel.js';
import type { PendingBatch } from './pending-batch.js';

/**
 * When a channel's checkpoint falls due: after `checkpointSamples` samples since its last one,
 * whatever its window (a restart then replays at most that many samples of the channel), and for
 * every channel with new samples at a clean stop. Only channels that took samples since the last
 * commit are looked at. (The rule used to wait for two window lengths as well, so a growing window
 * was never checkpointed while it grew and a restart replayed it from its start.) A checkpoint holds
 * the window's samples: its size grows with the window (about 24 bytes a sample for a growing one),
 * which `checkpointSamples` trades against the replay.
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
      if ((final && next > last) || next - last >= this.checkpointSamples) {
        batch.setCheckpoint({ channel: channel.name, ...channel.checkpoint() });
        this.last.set(channel.name, next);
      }
    }
  }
}
