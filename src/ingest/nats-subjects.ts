/**
 * MQTT topics and NATS subjects. nats-server's MQTT listener turns the topic `rig/a/b` into the
 * subject `rig.a.b`; the server's subject mapping then puts it into a partition,
 * `<prefix>.<p>.rig.a.b`. The sample source hands the daemon the MQTT topic again, so the
 * configured subscriptions (MQTT topic filters) and channel templates ({2}) work unchanged.
 * Topic levels must not contain dots (a dot separates subject tokens).
 */

/** The subject a rig topic is published on (before the server's mapping into a partition). */
export function topicToSubject(topic: string): string {
  return topic.split('/').join('.');
}

/** The MQTT topic of a partitioned subject: the prefix and the partition token removed, dots back to slashes. */
export function subjectToTopic(subject: string, prefix: string): string {
  const skip = prefix.split('.').length + 1;
  return subject.split('.').slice(skip).join('/');
}

/** The subjects of partition p (a consumer's filter). */
export function partitionFilter(prefix: string, partition: number): string {
  return `${prefix}.${partition}.>`;
}

/** What the stream captures: every partition. */
export function streamSubjects(prefix: string): string[] {
  return [`${prefix}.*.>`];
}

/** The durable consumer of partition p. */
export function consumerName(stream: string, partition: number): string {
  return `${stream}_p${partition}`;
}

/** A partition's log, as a source position names it. */
export function partitionSource(sourceName: string, partition: number): string {
  return `${sourceName}/p${partition}`;
}

/**
 * The server configuration line that maps rig subjects into partitions, for the README and the
 * start-up log: `rig.*.*` with the wildcards that form the partition key (by default all of them:
 * one channel per topic stays in one partition; give the rig's level alone to keep a rig together).
 */
export function mappingLine(sourceSubject: string, prefix: string, partitions: number, keyWildcards?: number[]): string {
  const count = sourceSubject.split('.').filter((t) => t === '*').length;
  const all = Array.from({ length: count }, (_, i) => i + 1);
  const key = keyWildcards ?? all;
  const tokens: string[] = [];
  let w = 0;
  for (const t of sourceSubject.split('.')) tokens.push(t === '*' ? `{{wildcard(${++w})}}` : t);
  return `"${sourceSubject}": "${prefix}.{{partition(${partitions},${key.join(',')})}}.${tokens.join('.')}"`;
}
