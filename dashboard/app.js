// plateau dashboard: wiring. State comes from the live link (hello, then channel and derived-result
// updates, events and test points); views read it and update in place. Routes: #/ (derived results
// and channels), #/channel/<name>, #/derived/<name>, #/test-points, #/records. Nothing from the network is
// ever parsed as HTML (see lib/dom.js).

import { h, byId, setText } from './lib/dom.js';
import { api, writeKey, setWriteKey } from './lib/api.js';
import { LiveLink } from './lib/live.js';
import { clockTime } from './lib/format.js';
import { OverviewView } from './views/overview.js';
import { ChannelView } from './views/channel.js';
import { DerivedView } from './views/derived.js';
import { TestPointsView } from './views/test-points.js';
import { FeedView } from './views/feed.js';
import { RecordsView } from './views/records.js';
import { ChannelHistory } from './lib/history.js';

const MAX_EVENTS = 500;

class App {
  constructor() {
    this.state = { channels: new Map(), derived: new Map(), testPoints: [], events: [], acknowledgements: new Map(), server: null, lastEventId: 0, connection: 'connecting' };
    this.history = new ChannelHistory();
    const main = byId('main');
    this.overview = new OverviewView(main, this);
    this.channel = new ChannelView(main, this);
    this.derived = new DerivedView(main, this);
    this.testPoints = new TestPointsView(main, this);
    this.records = new RecordsView(main, this);
    this.feed = new FeedView(byId('side'), this);
    this.firstData = false;
    this.lastUpdateMs = 0;
    this.setupConnectionIndicator();
    this.setupTheme();
    this.setupWriteKey();
    window.addEventListener('hashchange', () => this.route());
    this.link = new LiveLink({ onMessage: (m) => this.onMessage(m), onStatus: (s) => this.onStatus(s) });
    this.loadServer();
    this.route();
    this.link.start();
    setInterval(() => this.tick(), 1000);
  }

  async loadServer() {
    try {
      this.state.server = await api.server();
      setText(byId('server-version'), `v${this.state.server.version}`);
      setText(byId('caution'), this.state.server.caution);
      this.updateWriteKeyButton();
      this.testPoints.updateChannels();
      this.feed.render();
    } catch {
      setTimeout(() => this.loadServer(), 2000);
    }
  }

  route() {
    const hash = location.hash || '#/';
    const channelMatch = /^#\/channel\/(.+)$/.exec(hash);
    const derivedMatch = /^#\/derived\/(.+)$/.exec(hash);
    for (const link of document.querySelectorAll('.tabs a')) link.classList.toggle('active', link.getAttribute('href') === (channelMatch || derivedMatch ? '#/' : hash));
    const decoded = (text) => {
      try {
        return decodeURIComponent(text);
      } catch {
        return text;
      }
    };
    if (hash !== '#/records') this.records.show(false);
    if (channelMatch) {
      const name = decoded(channelMatch[1]);
      this.overview.show(false);
      this.testPoints.show(false);
      this.derived.close();
      this.channel.open(name);
      document.title = `${name} · plateau`;
    } else if (derivedMatch) {
      const name = decoded(derivedMatch[1]);
      this.overview.show(false);
      this.testPoints.show(false);
      this.channel.close();
      this.derived.open(name);
      document.title = `${name} · plateau`;
    } else if (hash === '#/records') {
      this.channel.close();
      this.derived.close();
      this.overview.show(false);
      this.testPoints.show(false);
      this.records.show(true);
      document.title = 'Records · plateau';
    } else if (hash === '#/test-points') {
      this.channel.close();
      this.derived.close();
      this.overview.show(false);
      this.testPoints.show(true);
      document.title = 'Test points · plateau';
    } else {
      this.channel.close();
      this.derived.close();
      this.testPoints.show(false);
      this.overview.show(true);
      document.title = 'plateau · sheet';
    }
  }

  onMessage(message) {
    switch (message.type) {
      case 'hello': {
        const seenBefore = this.state.lastEventId;
        this.state.channels = new Map(message.channels.map((c) => [c.name, c]));
        for (const summary of message.channels) this.history.note(summary);
        this.state.derived = new Map((message.derived ?? []).map((d) => [d.name, d]));
        this.state.testPoints = message.testPoints;
        this.mergeEvents(message.events ?? []);
        this.catchUp(seenBefore, message.events?.[0]?.id ?? Infinity);
        for (const ack of message.acknowledgements ?? []) this.state.acknowledgements.set(ack.eventId, ack);
        this.state.lastEventId = Math.max(this.state.lastEventId, message.lastEventId ?? 0);
        this.showHealth(message.health);
        this.lastUpdateMs = Date.now();
        this.overview.update();
        this.overview.updateDerived();
        this.refreshOpenChannel();
        this.refreshOpenDerived();
        this.testPoints.updateChannels();
        this.testPoints.update();
        this.records.testPointsChanged();
        this.feed.render();
        if (!this.firstData) {
          this.firstData = true;
          performance.mark('plateau:first-data');
        }
        break;
      }
      case 'channels': {
        const names = [];
        let added = false;
        for (const summary of message.channels) {
          if (!this.state.channels.has(summary.name)) added = true;
          this.state.channels.set(summary.name, summary);
          this.history.note(summary);
          names.push(summary.name);
        }
        this.lastUpdateMs = Date.now();
        this.overview.update(names);
        this.refreshOpenChannel();
        if (added && !this.testPoints.element.hidden) this.testPoints.updateChannels();
        break;
      }
      case 'derived': {
        const names = [];
        for (const d of message.derived ?? []) {
          this.state.derived.set(d.name, d);
          names.push(d.name);
        }
        this.lastUpdateMs = Date.now();
        this.overview.updateDerived(names);
        this.refreshOpenDerived();
        if (!this.testPoints.element.hidden) this.testPoints.updateDerivedChips();
        break;
      }
      case 'event':
        this.mergeEvents([message.event]);
        if (message.event.kind === 'alert-acknowledged') {
          const body = message.event.body ?? {};
          this.noteAcknowledgement({ eventId: body.eventId, recordId: message.event.id, timeMs: message.event.timeMs, note: body.note ?? null });
        } else this.feed.render();
        break;
      case 'health':
        this.showHealth(message.health);
        break;
      case 'testPoints':
        this.state.testPoints = message.testPoints;
        if (!this.testPoints.element.hidden) this.testPoints.update();
        this.records.testPointsChanged();
        break;
      default:
        break;
    }
  }

  refreshOpenDerived() {
    const name = this.derived.name;
    if (name && this.state.derived.has(name)) this.derived.update(this.state.derived.get(name));
  }

  refreshOpenChannel() {
    const name = this.channel.name;
    if (name && this.state.channels.has(name)) this.channel.updateSummary(this.state.channels.get(name));
  }

  /** Adds events (kept newest first, no duplicates, bounded). */
  mergeEvents(events) {
    const known = new Map(this.state.events.map((e) => [e.id, e]));
    for (const e of events) known.set(e.id, e);
    this.state.events = [...known.values()].sort((a, b) => b.id - a.id).slice(0, MAX_EVENTS);
    for (const e of events) if (e.id > this.state.lastEventId) this.state.lastEventId = e.id;
  }

  /** After a reconnection: the events missed while away, when the hello does not reach back far enough. */
  async catchUp(seenBefore, oldestInHello) {
    if (seenBefore === 0 || oldestInHello <= seenBefore + 1) return;
    try {
      const { events, acknowledgements } = await api.eventsAfter(seenBefore);
      this.mergeEvents(events);
      for (const ack of acknowledgements ?? []) this.state.acknowledgements.set(ack.eventId, ack);
      this.feed.render();
    } catch {
      // the feed shows what the hello brought
    }
  }

  noteAcknowledgement(ack) {
    if (ack && Number.isInteger(ack.eventId)) this.state.acknowledgements.set(ack.eventId, ack);
    this.feed.render();
  }

  upsertTestPoint(point) {
    const list = this.state.testPoints.filter((p) => p.id !== point.id);
    list.push(point);
    this.state.testPoints = list;
    this.testPoints.update();
    this.records.testPointsChanged();
  }

  // ---- connection indicator -----------------------------------------------------------------

  /** The daemon's own health: a banner while its commits to the store fail. */
  showHealth(health) {
    const failing = health?.status === 'failing';
    byId('store-banner').hidden = !failing;
    if (!failing) return;
    const store = health.store ?? {};
    const error = store.lastError ? ` (${store.lastError.code}: ${store.lastError.message})` : '';
    const since = typeof store.since === 'number' ? ` since ${clockTime(store.since)}` : '';
    setText(byId('store-banner-text'), `The daemon cannot store samples${since}${error}. Nothing is acknowledged to the broker meanwhile; it retries by itself and stores everything once it can.`);
  }

  setupConnectionIndicator() {
    this.pill = byId('connection');
    this.banner = byId('connection-banner');
    this.bannerText = byId('connection-banner-text');
    byId('retry-now').addEventListener('click', () => this.link.retryNow());
  }

  onStatus(status) {
    this.status = status;
    this.state.connection = status.state;
    this.renderStatus();
  }

  renderStatus() {
    const status = this.status;
    if (!status) return;
    const lost = status.state === 'lost' || (status.state === 'connecting' && status.since !== null);
    document.body.classList.toggle('disconnected', lost);
    this.banner.hidden = !lost;
    if (status.state === 'live') {
      this.pill.className = 'link-state live';
      setText(this.pill, 'link: receiving');
    } else if (!lost) {
      this.pill.className = 'link-state connecting';
      setText(this.pill, 'link: connecting…');
    } else {
      this.pill.className = 'link-state lost';
      setText(this.pill, '! link lost: values frozen');
      const wait = status.state === 'lost' && status.retryAtMs ? Math.max(0, Math.ceil((status.retryAtMs - Date.now()) / 1000)) : 0;
      const frozen = this.lastUpdateMs ? ` Values shown are frozen as of ${clockTime(this.lastUpdateMs)}.` : '';
      setText(this.bannerText, `Connection to the daemon lost — reconnecting${wait > 0 ? ` in ${wait} s` : ' now'} (attempt ${status.attempt}).${frozen}`);
    }
  }

  /** Once a second: the countdown of a reconnection (there is no clock on the sheet). */
  tick() {
    if (this.status && this.status.state !== 'live') this.renderStatus();
  }

  // ---- light and dark sheet -----------------------------------------------------------------

  /** The light sheet by default (print-friendly), the dark one when the system prefers it or the reader chooses it; kept in this browser. */
  setupTheme() {
    this.themeButton = byId('theme-toggle');
    let stored = null;
    try {
      stored = localStorage.getItem('plateau.theme');
    } catch {
      stored = null;
    }
    const prefersDark = window.matchMedia?.('(prefers-color-scheme: dark)').matches;
    this.applyTheme(stored === 'dark' || stored === 'light' ? stored : prefersDark ? 'dark' : 'light');
    this.themeButton.addEventListener('click', () => {
      const next = document.documentElement.dataset.theme === 'dark' ? 'light' : 'dark';
      this.applyTheme(next);
      try {
        localStorage.setItem('plateau.theme', next);
      } catch {
        // kept for this page only
      }
    });
  }

  applyTheme(theme) {
    document.documentElement.dataset.theme = theme;
    setText(this.themeButton, theme === 'dark' ? 'light sheet' : 'dark sheet');
    this.themeButton.setAttribute('aria-pressed', String(theme === 'dark'));
    // Charts take their colours when they are built: an open view is built again.
    for (const view of [this.channel, this.derived]) {
      const name = view?.name;
      if (name) {
        view.close();
        view.open(name);
      }
    }
  }

  // ---- write key ----------------------------------------------------------------------------

  setupWriteKey() {
    this.keyButton = byId('write-key');
    this.keyDialog = byId('key-dialog');
    this.keyInput = byId('key-input');
    this.keyButton.addEventListener('click', () => this.askWriteKey());
    byId('key-form').addEventListener('submit', (event) => {
      event.preventDefault();
      setWriteKey(this.keyInput.value.trim());
      this.keyInput.value = '';
      this.keyDialog.close();
      this.updateWriteKeyButton();
    });
    byId('key-forget').addEventListener('click', () => {
      setWriteKey('');
      this.keyInput.value = '';
      this.keyDialog.close();
      this.updateWriteKeyButton();
    });
    byId('key-cancel').addEventListener('click', () => this.keyDialog.close());
  }

  askWriteKey() {
    if (!this.keyDialog.open) this.keyDialog.showModal();
    this.keyInput.focus();
  }

  updateWriteKeyButton() {
    const needs = this.state.server?.writesNeedToken;
    const has = Boolean(writeKey());
    setText(this.keyButton, has ? 'write key set' : needs ? 'write key needed' : 'writes open (no key)');
    this.keyButton.className = `quiet key-button${needs && !has ? ' needed' : ''}`;
    this.testPoints.updateLock();
  }
}

window.plateau = new App();
