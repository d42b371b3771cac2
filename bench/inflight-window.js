// The QoS 1 publishers' bound on messages awaiting their acknowledgement. At most `max`
// unacknowledged: mqtt.js's 16-bit message ids wrap after 65,535 and reuse the id of a message still
// in flight, whose acknowledgement callback is then lost (with 'yield once per publish', a broker
// slower than the publisher let bench:e2e's 100,000 one-sample messages pass that and the publisher
// waited forever). Every wait is bounded.

export class InflightWindow {
  constructor(max = 2000, waitMs = 60_000) {
    this.max = max;
    this.waitMs = waitMs;
    this.count = 0;
    this.wake = null;
    /** The publish callback: one acknowledgement came. */
    this.acknowledged = () => {
      this.count--;
      if (this.wake !== null && this.count < this.max) {
        const resolve = this.wake;
        this.wake = null;
        resolve(true);
      }
    };
  }

  /** Counts a message about to be published (its callback is `acknowledged`). */
  track() {
    this.count++;
  }

  /** After a publish: resolves true at once while there is room, else when there is; false after waitMs (a stall). */
  async room() {
    if (this.count < this.max) return true;
    return new Promise((resolve) => {
      const timer = setTimeout(() => ((this.wake = null), resolve(false)), this.waitMs);
      this.wake = (ok) => (clearTimeout(timer), resolve(ok));
    });
  }

  /** Waits (at most `ms`) until every acknowledgement came. */
  async drained(ms = this.waitMs) {
    const deadline = Date.now() + ms;
    while (this.count > 0 && Date.now() < deadline) await new Promise((resolve) => setTimeout(resolve, 5));
  }
}
