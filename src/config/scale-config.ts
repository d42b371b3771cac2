import { describe, type ConfigReader, type Plain } from './config-reader.js';

/**
 * Scale-out on NATS JetStream (`broker.url: nats://...`, `scale:`): the stream that holds the
 * partitioned log, how many partitions it has, the worker's name and its leases.
 *
 * The stream captures `<subjectPrefix>.<p>.>` for p in 0..partitions-1; the server's subject
 * mapping (`partition(P, ...)`, see the README) puts every rig subject into one partition, the
 * same channel always into the same one. Each partition has one durable consumer,
 * `<stream>_p<p>`, read only by the worker that holds the partition's lease.
 */
export interface ScaleConfig {
  /** NATS servers (nats://host:port), one or several for a cluster. */
  servers: string[];
  partitions: number;
  /** The JetStream stream holding the partitioned log. */
  stream: string;
  /** First token(s) of the partitioned subjects: `<subjectPrefix>.<p>.<rig subject>`. */
  subjectPrefix: string;
  /** Stream, consumer and key-value replicas (1, or 3 / 5 on a cluster). */
  replicas: number;
  /** This worker's name: unique among the workers of one lab. */
  worker: string;
  /** A lease not renewed for this long expires; a worker renews every third of it. */
  leaseSeconds: number;
  /** The key-value bucket of the leases. */
  leaseBucket: string;
  /** The key-value bucket of the partitions' shared checkpoints. */
  checkpointBucket: string;
  /** Channel samples between shared checkpoints (store.checkpointSamples). */
  checkpointSamples: number;
  /** Messages fetched per pull request. */
  fetchBatch: number;
}

const NAME = /^[A-Za-z0-9_-]{1,64}$/;
const SUBJECT_TOKENS = /^[A-Za-z0-9_-]+(\.[A-Za-z0-9_-]+)*$/;

/** True when the broker URL (or every one of a list) is a NATS URL. */
export function isNatsUrl(url: string): boolean {
  return /^nats:\/\/[^\s/]+$/.test(url);
}

/**
 * Reads `scale` for a NATS broker (`urls` the broker.url value or values); returns null and
 * notes a problem when `scale` is given for an MQTT broker. One problem per line, with its key.
 */
export function readScale(r: ConfigReader, value: unknown, urls: string[], nats: boolean, checkpointSamples = 100_000): ScaleConfig | null {
  if (!nats) {
    if (value !== undefined) r.problem('scale', 'applies only to a NATS broker (broker.url: nats://host:port); remove it or point broker.url at a NATS server');
    return null;
  }
  const s: Plain = r.section(value ?? {}, 'scale', ['partitions', 'stream', 'subjectPrefix', 'replicas', 'worker', 'leaseSeconds', 'leaseBucket', 'checkpointBucket', 'fetchBatch']);
  const worker = r.string(s, 'worker', 'scale', '');
  if (s.worker === undefined) r.problem('scale.worker', "missing: this worker's name (unique among the lab's workers), such as worker-1");
  else if (!NAME.test(worker)) r.problem('scale.worker', `expected letters, digits, - and _ (at most 64), got ${describe(worker)}`);
  const stream = r.string(s, 'stream', 'scale', 'PLATEAU');
  if (!NAME.test(stream)) r.problem('scale.stream', `expected a stream name of letters, digits, - and _, got ${describe(stream)}`);
  const subjectPrefix = r.string(s, 'subjectPrefix', 'scale', 'part');
  if (!SUBJECT_TOKENS.test(subjectPrefix)) r.problem('scale.subjectPrefix', `expected subject tokens such as part or lab.part, got ${describe(subjectPrefix)}`);
  const leaseBucket = r.string(s, 'leaseBucket', 'scale', `${NAME.test(stream) ? stream : 'PLATEAU'}_leases`);
  if (!NAME.test(leaseBucket)) r.problem('scale.leaseBucket', `expected a bucket name of letters, digits, - and _, got ${describe(leaseBucket)}`);
  const checkpointBucket = r.string(s, 'checkpointBucket', 'scale', `${NAME.test(stream) ? stream : 'PLATEAU'}_checkpoints`);
  if (!NAME.test(checkpointBucket)) r.problem('scale.checkpointBucket', `expected a bucket name of letters, digits, - and _, got ${describe(checkpointBucket)}`);
  const replicas = r.number(s, 'replicas', 'scale', { min: 1, max: 5, integer: true }, 1);
  return {
    servers: urls,
    partitions: r.number(s, 'partitions', 'scale', { min: 1, max: 1024, integer: true }, 1),
    stream,
    subjectPrefix,
    replicas,
    worker,
    leaseSeconds: r.number(s, 'leaseSeconds', 'scale', { min: 1, max: 3600 }, 3),
    leaseBucket,
    checkpointBucket,
    checkpointSamples,
    fetchBatch: r.number(s, 'fetchBatch', 'scale', { min: 1, max: 10_000, integer: true }, 256),
  };
}
