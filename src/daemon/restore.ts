import type { Logger } from 'pino';
import type { ChannelRegistry } from '../engine/channel-registry.js';
import type { RestoreReport } from '../engine/channel.js';
import type { TestPoint, TestPoints } from '../engine/test-points.js';
import type { Store } from '../ports/store.js';
import type { Ingest } from './ingest.js';

/**
 * Restart: every stored channel is rebuilt by its own `Channel.restore` (its checkpoint loaded,
 * or set aside as the channel decides, then its stored samples through the same accept
 * path as live ones, with the window marks at their index); then the test points. The log names,
 * per channel, a checkpoint that was set aside (and why), and counts each outcome.
 */
export interface RestoreSummary {
  channels: number;
  outcomes: Record<RestoreReport['outcome'], number>;
  replayed: number;
  forced: number;
  ms: number;
  /** Per channel, the index its checkpoint was at (for the checkpoint schedule). */
  checkpointAt: Map<string, number>;
}

export function restoreChannels(store: Store, registry: ChannelRegistry, ingest: Ingest, log: Logger): RestoreSummary {
  const started = performance.now();
  const summary: RestoreSummary = { channels: 0, outcomes: { fresh: 0, loaded: 0, replayed: 0 }, replayed: 0, forced: 0, ms: 0, checkpointAt: new Map() };
  for (const stored of store.channels()) {
    const channel = registry.ensure(stored.name, stored.unit);
    ingest.known(channel);
    const report = channel.restore(store.checkpoint(stored.name), {
      samplesFrom: (seq) => store.samplesFrom(stored.name, seq),
      marksFrom: (seq) => store.marksFrom(stored.name, seq),
    });
    summary.channels++;
    summary.outcomes[report.outcome]++;
    summary.replayed += report.replayed;
    summary.forced += report.forced;
    if (report.outcome === 'replayed' || report.detail !== null) {
      log.info({ channel: stored.name, checkpoint: report.outcome, replayedSamples: report.replayed }, `restore ${stored.name}: checkpoint ${report.outcome}${report.detail ? `: ${report.detail}` : ''}`);
    }
    // A channel loaded from its checkpoint has one at that index; one rebuilt otherwise gets a new one at the first commit.
    if (report.outcome === 'loaded') summary.checkpointAt.set(stored.name, channel.nextSeq - report.replayed);
    else if (report.replayed > 0) ingest.touch(channel);
  }
  if (summary.forced > 0) log.warn({ samples: summary.forced }, 'restore: stored samples the time policy would refuse now (the samples their lateness was judged against were removed by retention) were taken as they were the first time');
  summary.ms = performance.now() - started;
  return summary;
}

/** The stored test points (their windows were restored with the channels, by the marks). */
export function restoreTestPoints(store: Store, testPoints: TestPoints, registry: ChannelRegistry): void {
  testPoints.load(store.testPoints() as TestPoint[]);
  // A window whose close was not replayed (a test point stopped at the index it started at): only running test points keep theirs.
  const running = new Set(testPoints.list().filter((p) => p.state !== 'stopped').map((p) => p.id));
  for (const channel of registry.all()) channel.keepWindows((id) => running.has(id));
}
