import { describe, expect, it } from 'vitest';
import { ChannelRegistry, RECENT_TIMES } from '../../src/engine/channel-registry.js';
import { DEFAULT_CHANNEL_OPTIONS } from '../../src/engine/channel-options.js';

// The time policy of the README ("Payloads and time"): a repeat of one of the last RECENT_TIMES
// accepted payload times is a duplicate, an older time within them is late and accepted, older
// still is out of order; arrival-stamped samples are never refused.

const T0 = 1_790_000_000_000;

function fed(count: number): ChannelRegistry {
  const registry = new ChannelRegistry(() => ({ ...DEFAULT_CHANNEL_OPTIONS, detectors: false }));
  for (let i = 0; i < count; i++) expect(registry.accept('cell.load_N', 1 + (i % 3), T0 + i, true).accepted).toBe(true);
  return registry;
}

describe('ChannelRegistry time policy', () => {
  it('refuses a repeat of any of the recent times, even the oldest remembered', () => {
    const registry = fed(RECENT_TIMES + 10);
    for (const back of [0, 1, RECENT_TIMES - 1]) {
      const result = registry.accept('cell.load_N', 5, T0 + RECENT_TIMES + 9 - back, true);
      expect(result).toMatchObject({ accepted: false, reason: 'duplicate' });
    }
    expect(registry.get('cell.load_N')?.pipeline.totalReceived).toBe(RECENT_TIMES + 10);
  });

  it('accepts a time never seen that lies within the recent ones as late; older still is out of order', () => {
    const registry = new ChannelRegistry(() => ({ ...DEFAULT_CHANNEL_OPTIONS, detectors: false }));
    // Every other time, so the gaps hold times never seen.
    const count = RECENT_TIMES + 100;
    for (let i = 0; i < count; i++) registry.accept('cell.load_N', 1 + (i % 3), T0 + 2 * i, true);
    const newest = T0 + 2 * (count - 1);
    const oldestRemembered = newest - 2 * (RECENT_TIMES - 1);
    const late = registry.accept('cell.load_N', 2, oldestRemembered + 1, true);
    expect(late).toMatchObject({ accepted: true, late: true });
    // The late sample joins the remembered times: sent again, it is a duplicate.
    expect(registry.accept('cell.load_N', 2, oldestRemembered + 1, true)).toMatchObject({ accepted: false, reason: 'duplicate' });
    // Older than every remembered time (the late one pushed the oldest out): cannot tell, refused.
    expect(registry.accept('cell.load_N', 2, oldestRemembered - 1, true)).toMatchObject({ accepted: false, reason: 'out-of-order' });
    expect(registry.get('cell.load_N')?.lastTimeMs).toBe(newest);
  });

  it('holds an arrival-stamped sample at the last time instead of refusing it', () => {
    const registry = fed(3);
    const result = registry.accept('cell.load_N', 4, T0 - 5000, false);
    expect(result).toMatchObject({ accepted: true, timeMs: T0 + 2 });
  });
});
