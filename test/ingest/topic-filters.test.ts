import { describe, expect, it } from 'vitest';
import { brokerFilters, filterCovers, topicMatches } from '../../src/ingest/topic-filters.js';

// MQTT topic filter semantics (OASIS MQTT 3.1.1, section 4.7: + matches one level, # the rest,
// wildcards do not match topics starting with $).
describe('topic filters', () => {
  it('match as the MQTT specification says (4.7)', () => {
    expect(topicMatches('rig/+/inlet', 'rig/hx7/inlet')).toBe(true);
    expect(topicMatches('rig/+', 'rig/hx7/inlet')).toBe(false);
    expect(topicMatches('rig/#', 'rig/hx7/inlet')).toBe(true);
    expect(topicMatches('rig/#', 'rig')).toBe(true);
    expect(topicMatches('#', '$SYS/broker/load')).toBe(false);
    expect(topicMatches('+/broker', '$SYS/broker')).toBe(false);
  });
  it('one filter covers another when every topic of the second matches the first', () => {
    expect(filterCovers('rig/hx7/+', 'rig/hx7/senml')).toBe(true);
    expect(filterCovers('rig/#', 'rig/+/inlet')).toBe(true);
    expect(filterCovers('rig/+/inlet', 'rig/#')).toBe(false);
    expect(filterCovers('rig/+', 'rig/+/x')).toBe(false);
  });
  it('the daemon subscribes to the covering set only, so no message arrives twice', () => {
    expect(brokerFilters(['rig/hx7/+', 'rig/hx7/senml', 'plateau/command/#', 'rig/hx7/+'])).toEqual(['rig/hx7/+', 'plateau/command/#']);
    expect(brokerFilters(['a/+/c', 'a/b/+'])).toEqual(['a/+/c', 'a/b/+']);
  });
});
