import { describe, expect, it } from 'vitest';
import { ConfigError, parseConfig } from '../../src/config/load-config.js';

// `broker.url: nats://...` and `scale`: defaults, and one line per problem naming its key (the
// configuration's own convention, no outside source). Worker and rig names are invented.

const SUBSCRIPTIONS = [{ topic: 'lab/+/+', format: 'json', channel: '{3}' }];

function problems(document: Record<string, unknown>): string[] {
  try {
    parseConfig({ subscriptions: SUBSCRIPTIONS, ...document });
  } catch (error) {
    if (error instanceof ConfigError) return error.message.split('\n');
    throw error;
  }
  return [];
}

describe('scale configuration', () => {
  it('a nats:// URL selects JetStream ingest with its defaults; a list is a cluster', () => {
    const one = parseConfig({ subscriptions: SUBSCRIPTIONS, broker: { url: 'nats://127.0.0.1:4222' }, scale: { worker: 'bay-1' } });
    expect(one.scale).toEqual({ servers: ['nats://127.0.0.1:4222'], partitions: 1, stream: 'PLATEAU', subjectPrefix: 'part', replicas: 1, worker: 'bay-1', leaseSeconds: 3, leaseBucket: 'PLATEAU_leases', checkpointBucket: 'PLATEAU_checkpoints', checkpointSamples: 100_000, fetchBatch: 256 });
    const cluster = parseConfig({ subscriptions: SUBSCRIPTIONS, broker: { url: ['nats://10.0.0.1:4222', 'nats://10.0.0.2:4222', 'nats://10.0.0.3:4222'] }, scale: { worker: 'bay-2', partitions: 12, replicas: 3, stream: 'HALL', leaseSeconds: 5 } });
    expect(cluster.scale).toMatchObject({ servers: ['nats://10.0.0.1:4222', 'nats://10.0.0.2:4222', 'nats://10.0.0.3:4222'], partitions: 12, replicas: 3, stream: 'HALL', leaseBucket: 'HALL_leases', checkpointBucket: 'HALL_checkpoints', leaseSeconds: 5 });
    expect(cluster.broker.url).toBe('nats://10.0.0.1:4222,nats://10.0.0.2:4222,nats://10.0.0.3:4222');
    expect(parseConfig({ subscriptions: SUBSCRIPTIONS }).scale).toBeUndefined();
  });

  it('one line per problem, each naming its key', () => {
    expect(problems({ broker: { url: 'nats://127.0.0.1:4222' } })).toEqual(["scale.worker: missing: this worker's name (unique among the lab's workers), such as worker-1"]);
    const lines = problems({ broker: { url: ['nats://a:4222', 'mqtt://b:1883'] }, scale: { worker: 'bay 1', partitions: 0, replicas: 7, stream: 'a.b', leaseSeconds: 0, subjectPrefix: 'part.*', colour: 'blue' } });
    expect(lines).toHaveLength(8);
    for (const key of ['broker.url[1]', 'scale.worker', 'scale.partitions', 'scale.replicas', 'scale.stream', 'scale.leaseSeconds', 'scale.subjectPrefix', 'scale.colour']) {
      expect(lines.filter((line) => line.startsWith(`${key}:`)), key).toHaveLength(1);
    }
    expect(problems({ broker: { url: 'mqtt://127.0.0.1:1883' }, scale: { worker: 'bay-1' } })).toEqual(['scale: applies only to a NATS broker (broker.url: nats://host:port); remove it or point broker.url at a NATS server']);
    expect(problems({ broker: { url: 'nats://127.0.0.1:4222', tls: { caFile: 'ca.pem', rejectUnauthorized: false } }, scale: { worker: 'bay-1' } })).toEqual(["broker.tls.rejectUnauthorized: a NATS server's certificate is always verified: give its CA in broker.tls.caFile instead"]);
    expect(problems({ broker: { url: 'nats://' }, scale: { worker: 'bay-1' } })).toEqual(['broker.url: expected a NATS URL such as nats://127.0.0.1:4222, got "nats://"']);
  });
});
