import { describe, expect, it } from 'vitest';
import { ChannelRegistry } from '../../../src/engine/channel-registry.js';
import { TestPoints } from '../../../src/engine/test-points.js';
import { recordCsv } from '../../../src/engine/test-point-record.js';
import { DEFAULT_CHANNEL_OPTIONS, type ChannelOptions } from '../../../src/engine/channel-options.js';
import type { ReadinessPolicy } from '../../../src/engine/criteria/readiness-policy.js';
import type { CriterionSpec } from '../../../src/core/criteria/criterion-spec.js';
import { SeededRandom } from '../../../src/core/random/seeded-random.js';

// Test-point readiness under each policy, through the engine's TestPoints and the channels'
// pipelines: the policy's own definition (no outside source). The rig (chiller loop CL-3) and its
// signals are invented.

const T0 = 1_790_000_000;

const RULE: CriterionSpec = {
  name: 'on-set-point',
  statistic: 'setpoint-deviation',
  basis: { kind: 'readings' },
  window: { kind: 'seconds', seconds: 120 },
  tolerance: { absolute: 0.2, relative: null, relativeTo: 'reading', zero: 0 },
  comparison: 'at-most',
  setPoint: { kind: 'test-point' },
  minReadings: 2,
  holdSeconds: 60,
  lag: 1,
  direction: 'any',
  perSeconds: 1,
  preset: null,
  source: null,
  wording: null,
};

function setup(policy: ReadinessPolicy | null) {
  const options: ChannelOptions = { ...DEFAULT_CHANNEL_OPTIONS, criteria: { policy, rules: [RULE] } };
  const registry = new ChannelRegistry(() => options);
  const points = new TestPoints(registry);
  // A test point names channels the daemon knows (an unseen one is refused).
  registry.ensure('cl3.supply_degC', 'degC');
  const random = new SeededRandom(9);
  let t = T0;
  /** `seconds` at 5 Hz around `level`; returns the second at which the test point became ready, or null. */
  const feed = (seconds: number, level: number, id: string): number | null => {
    let readyAt: number | null = null;
    for (let s = 0; s < seconds; s++) {
      for (let k = 0; k < 5; k++) {
        t += 0.2;
        registry.accept('cl3.supply_degC', level + 0.02 * random.normal(), Math.round(t * 1000), true);
      }
      for (const change of points.evaluate(Math.round(t * 1000))) if (change.kind === 'test-point-ready' && change.point.id === id && readyAt === null) readyAt = t;
    }
    return readyAt;
  };
  return { registry, points, feed, now: () => t };
}

describe('test-point readiness under the policy', () => {
  it('rules: ready as soon as the rule holds, whatever the statistical verdict', () => {
    const { points, feed, registry, now } = setup('rules');
    points.start({ id: 'a', channels: ['cl3.supply_degC'], setPoints: { 'cl3.supply_degC': 7 } }, T0 * 1000);
    const readyAt = feed(400, 7, 'a');
    // The rule needs its 120 s window and its 60 s hold: ready at 180 s, not before.
    expect(readyAt).not.toBeNull();
    expect(readyAt! - T0).toBeGreaterThanOrEqual(180);
    expect(readyAt! - T0).toBeLessThan(182);
    expect(registry.get('cl3.supply_degC')!.pipeline.criteria!.tracker.allHold).toBe(true);
    expect(now() - T0).toBeGreaterThan(399);
  });

  it('rules: a channel off its set point never becomes ready, and the view says why', () => {
    const { points, feed } = setup('rules');
    points.start({ id: 'b', channels: ['cl3.supply_degC'], setPoints: { 'cl3.supply_degC': 7 } }, T0 * 1000);
    expect(feed(400, 7.5, 'b')).toBeNull();
    const [view] = points.verdict(points.get('b')!);
    expect(view!.reached).toBe(false);
    expect(view!.pending.join(' ')).toMatch(/rule on-set-point: 0\.5\d* exceeds the tolerance 0\.2/);
  });

  it('statistical: the rules do not hold it back (no set point given), and the record still carries them', () => {
    const { points, feed } = setup('statistical');
    points.start({ id: 'c', channels: ['cl3.supply_degC'] }, T0 * 1000);
    expect(feed(400, 7, 'c')).not.toBeNull();
    const record = points.record(points.get('c')!, 'ready', T0 * 1000);
    expect(record.entries[0]!.criteria).toMatchObject({ policy: 'statistical', ready: true, rulesReady: false, rules: [{ name: 'on-set-point', holds: false, heldOverWindow: false, setPoint: null }] });
    const csv = recordCsv(record).split('\r\n');
    expect(csv[0]!.split(',')).toContain('criteria');
    expect(csv[1]).toContain('on-set-point: does not hold, value n/a, tolerance 0.2, margin n/a');
  });
});
