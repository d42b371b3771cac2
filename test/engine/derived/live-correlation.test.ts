import { describe, expect, it } from 'vitest';
import { parseConfig, settingsFor } from '../../../src/config/load-config.js';
import { ChannelRegistry } from '../../../src/engine/channel-registry.js';
import { DerivedResults } from '../../../src/daemon/derived-results.js';
import { SeededRandom } from '../../../src/core/random/seeded-random.js';

// Live derived results carry their correlation with each other (GUM F.1.2.3: the covariance of two
// outputs from shared inputs), as records do. Here q1 = a + b and q2 = a - b from independent a and
// b of equal noise: their correlation is (var a - var b) / (var a + var b), near 0; with q3 = a + 2b,
// corr(q1, q3) = (var a + 2 var b) / sqrt(2 var (var a + 4 var b)) = 3 / sqrt(10) = 0.949 for equal
// variances (a consequence of the propagation law, worked out here).
describe('live correlation between derived results', () => {
  it('is filled in the live snapshots, and matches the propagation law', () => {
    const config = parseConfig({
      subscriptions: [{ topic: 'lab/+', format: 'json', channel: '{2}' }],
      channels: { defaults: { window: { kind: 'growing' } } },
      derived: [
        { name: 'q1', expression: 'a + b' },
        { name: 'q2', expression: 'a - b' },
        { name: 'q3', expression: 'a + 2 * b' },
      ],
    });
    const registry = new ChannelRegistry((name) => {
      const s = settingsFor(config, name);
      return { window: s.window, maxLag: s.maxLag, estimator: s.estimator, confidence: s.confidence, target: s.target, rate: s.rate, falseAlarmSamples: s.falseAlarmSamples, staleSeconds: s.staleSeconds };
    });
    const derived = new DerivedResults(config, registry);
    const random = new SeededRandom(3);
    for (let i = 0; i < 20_000; i++) {
      const t = 1_764_700_000_000 + i * 100;
      for (const [name, value] of [['a', 10 + random.normal()], ['b', 5 + random.normal()]] as const) {
        registry.accept(name, value, t, true);
        derived.onSample(name);
      }
    }
    const views = derived.snapshots();
    const q1 = views.find((v) => v.name === 'q1');
    expect(q1?.correlation).toBeDefined();
    // The variances of the two means are estimates with nu of about sqrt(20000) = 141 batches each,
    // so this correlation has a standard error near 1/sqrt(nu) = 0.084: allow three.
    expect(Math.abs((q1?.correlation as Record<string, number>).q2 as number)).toBeLessThan(0.25);
    expect((q1?.correlation as Record<string, number>).q3).toBeCloseTo(3 / Math.sqrt(10), 1);
  });
});
