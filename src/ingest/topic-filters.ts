/**
 * MQTT topic filters (MQTT 3.1.1, 4.7): matching, covering, and the most specific match.
 */

/**
 * The filters to subscribe to at the broker: every configured filter that no other one covers.
 * Overlapping subscriptions make a broker deliver a message once per matching filter (MQTT 3.1.1
 * leaves it open; aedes does, and drops the connection over the repeated acknowledgements), so the
 * daemon subscribes to the covering set and picks the most specific configured filter itself.
 */
export function brokerFilters(filters: string[]): string[] {
  const unique = [...new Set(filters)];
  return unique.filter((f) => !unique.some((g) => g !== f && filterCovers(g, f)));
}

/** True when every topic that matches `inner` also matches `outer`. */
export function filterCovers(outer: string, inner: string): boolean {
  const o = outer.split('/');
  const i = inner.split('/');
  for (let k = 0; k < o.length; k++) {
    const a = o[k];
    if (a === '#') return true;
    const b = i[k];
    if (b === undefined || b === '#') return false;
    if (a === '+') continue;
    if (b === '+' || a !== b) return false;
  }
  return o.length === i.length;
}

/** MQTT topic filter matching (+ one level, # the rest; $-topics only by filters naming them). */
export function topicMatches(filter: string, topic: string): boolean {
  const f = filter.split('/');
  const t = topic.split('/');
  for (let i = 0; i < f.length; i++) {
    const part = f[i];
    if (part === '#') return i > 0 || !topic.startsWith('$');
    if (i >= t.length) return false;
    if (part === '+') {
      if (i === 0 && (t[0] as string).startsWith('$')) return false;
      continue;
    }
    if (part !== t[i]) return false;
  }
  return f.length === t.length;
}

/** The most specific of the items whose filter matches the topic: fewest wildcards, then the longest filter. */
export function mostSpecific<T extends { topic: string }>(items: readonly T[], topic: string): T | null {
  let best: T | null = null;
  let bestScore = Number.POSITIVE_INFINITY;
  for (const item of items) {
    if (!topicMatches(item.topic, topic)) continue;
    const wildcards = (item.topic.match(/[+#]/g) ?? []).length;
    const score = wildcards * 100_000 - item.topic.length;
    if (score < bestScore) {
      best = item;
      bestScore = score;
    }
  }
  return best;
}
