// The live link to the daemon (WebSocket /ws). It reconnects by itself with a growing, jittered
// delay (0.5 s doubling to 10 s), and treats a silent connection as dead: the daemon sends at
// least a beat every few seconds, so 15 s without a message means the connection is gone even when
// the socket has not noticed.

const DELAYS_MS = [500, 1000, 2000, 4000, 8000, 10000];
const SILENCE_MS = 15000;

export class LiveLink {
  /**
   * handlers: onMessage(message), onStatus({ state: 'connecting' | 'live' | 'lost', attempt,
   * retryAtMs, since }).
   */
  constructor(handlers) {
    this.handlers = handlers;
    this.socket = null;
    this.attempt = 0;
    this.retryTimer = null;
    this.watchdog = null;
    this.lastMessageMs = 0;
    this.lostSinceMs = null;
  }

  start() {
    this.connect();
  }

  /** Skips the wait before the next attempt. */
  retryNow() {
    if (this.socket) return;
    clearTimeout(this.retryTimer);
    this.connect();
  }

  connect() {
    this.retryTimer = null;
    const scheme = location.protocol === 'https:' ? 'wss:' : 'ws:';
    let socket;
    this.status('connecting');
    try {
      socket = new WebSocket(`${scheme}//${location.host}/ws`);
    } catch {
      this.scheduleRetry();
      return;
    }
    this.socket = socket;
    socket.addEventListener('message', (event) => {
      this.lastMessageMs = Date.now();
      let message;
      try {
        message = JSON.parse(event.data);
      } catch {
        return;
      }
      if (message && message.type === 'hello') {
        this.attempt = 0;
        this.lostSinceMs = null;
        this.status('live');
      }
      this.handlers.onMessage(message);
    });
    socket.addEventListener('open', () => {
      this.lastMessageMs = Date.now();
      clearInterval(this.watchdog);
      this.watchdog = setInterval(() => {
        if (Date.now() - this.lastMessageMs > SILENCE_MS) socket.close();
      }, 1000);
    });
    const lost = () => {
      if (this.socket !== socket) return;
      this.socket = null;
      clearInterval(this.watchdog);
      this.scheduleRetry();
    };
    socket.addEventListener('close', lost);
    socket.addEventListener('error', lost);
  }

  scheduleRetry() {
    if (this.lostSinceMs === null) this.lostSinceMs = Date.now();
    const base = DELAYS_MS[Math.min(this.attempt, DELAYS_MS.length - 1)];
    const delay = Math.round(base * (0.8 + 0.4 * Math.random()));
    this.attempt++;
    this.retryTimer = setTimeout(() => this.connect(), delay);
    this.status('lost', Date.now() + delay);
  }

  status(state, retryAtMs = null) {
    this.handlers.onStatus({ state, attempt: this.attempt, retryAtMs, since: this.lostSinceMs });
  }
}
