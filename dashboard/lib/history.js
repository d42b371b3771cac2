// What the page has seen of each channel since it opened: a point per live summary (the WebSocket
// sends one per channel at most every 250 ms while it changes), kept in this page only. It feeds
// the running mean ± U plot of the channel view (the mean and its expanded uncertainty as the
// daemon stated them at each moment) and the trend line of each entry on the sheet (the last
// values). The daemon keeps no such history: a reload of the page starts it again, and a restart
// of a channel's averaging window (a test point, a break) starts a new run of its mean.

const MAX_POINTS = 1200;
const TREND_POINTS = 120;

export class ChannelHistory {
  constructor() {
    this.channels = new Map();
    this.sinceMs = Date.now();
  }

  /** Notes a summary (a WebSocket or hello summary of one channel). */
  note(s) {
    if (!s || typeof s.name !== 'string') return;
    let h = this.channels.get(s.name);
    if (!h) {
      h = { points: [], trend: [], lastReceived: -1, runStartMs: Date.now() };
      this.channels.set(s.name, h);
    }
    if (s.received === h.lastReceived) return;
    h.lastReceived = s.received;
    const time = typeof s.last?.time === 'number' ? s.last.time : Date.now() / 1000;
    if (s.last && Number.isFinite(s.last.value)) {
      h.trend.push({ time, value: s.last.value });
      if (h.trend.length > TREND_POINTS) h.trend.shift();
    }
    // A window that starts again (n falls): a new run of the mean.
    const previous = h.points.at(-1);
    if (previous && s.n < previous.n) {
      h.points = [];
      h.runStartMs = Date.now();
    }
    if (s.mean === null || s.mean === undefined || !Number.isFinite(s.mean)) return;
    h.points.push({ time, n: s.n, mean: s.mean, U: Number.isFinite(s.expandedUncertainty) ? s.expandedUncertainty : null, state: s.state });
    // Bounded: every other point of the older half goes when full (the shape of the curve stays).
    if (h.points.length > MAX_POINTS) h.points = [...h.points.slice(0, MAX_POINTS / 2).filter((_, i) => i % 2 === 0), ...h.points.slice(MAX_POINTS / 2)];
  }

  /** The running mean of the current run: [{ time, n, mean, U, state }], oldest first. */
  run(name) {
    return this.channels.get(name)?.points ?? [];
  }

  runStartMs(name) {
    return this.channels.get(name)?.runStartMs ?? this.sinceMs;
  }

  /** The last values seen: [{ time, value }], oldest first. */
  trend(name) {
    return this.channels.get(name)?.trend ?? [];
  }
}
