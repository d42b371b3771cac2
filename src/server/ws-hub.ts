import { unitLabel } from '../engine/unit-label.js';
import { WebSocketServer, type WebSocket } from 'ws';
import type { IncomingMessage } from 'node:http';
import type { Duplex } from 'node:stream';
import type { ChannelSummary } from '../engine/channel-pipeline.js';
import type { DaemonApi, DaemonHealth, IntakeBrief } from '../ports/daemon-api.js';
import type { StoredEvent } from '../ports/store.js';
import { sameOrigin } from './origin.js';

/**
 * The WebSocket hub (ws) on /ws: events go to every client at once; channel updates go at most
 * every updateIntervalMs per client, whatever the sample rate, carrying only the channels that
 * changed since that client's last update; derived results likewise, in their own message, each
 * whole (the view of GET /api/derived, about 2.5 kB for a result of three inputs) when its text
 * changed; test points go when one of them may have changed.
 *
 * Bounded: a client whose socket buffer holds more than skipBytes is skipped (it gets no channel
 * update until it drains, then one update with every channel); beyond dropBytes it is dropped,
 * events included, and reconnects to a fresh hello. Clients send nothing: a frame above
 * maxPayloadBytes closes the connection. At most maxClients at once (503 beyond). A connection
 * whose Origin header names another site is refused (403): a page elsewhere must not read the rig.
 * Dead peers are found by ping/pong every heartbeatMs; a beat message every beatMs of silence lets
 * a browser (which cannot see pings) notice a half-open connection.
 *
 * Messages (JSON text frames):
 *   { type: "hello", protocol: 1, serverTimeMs, channels: [summary...], derived: [result...],
 *     testPoints: [...], lastEventId, events: [the latest, oldest first], acknowledgements: [...],
 *     health: { status, broker, store } }
 *   { type: "event", event: { id, timeMs, source, kind, at, body } }
 *   { type: "health", health: { status, broker, store } }   at once when it changes (a failing store)
 *   { type: "channels", serverTimeMs, channels: [summary...] }
 *   { type: "derived", serverTimeMs, derived: [result...] }
 *   { type: "testPoints", testPoints: [...] }
 *   { type: "beat", serverTimeMs }
 * Cost per tick: one summary per channel with new samples or events (tens of microseconds each),
 * and one snapshot per derived result with new rows (about 0.3 ms each), shared by every client;
 * then one JSON text per client.
 */
export interface WsHubOptions {
  updateIntervalMs?: number;
  skipBytes?: number;
  dropBytes?: number;
  heartbeatMs?: number;
  beatMs?: number;
  maxClients?: number;
  /** Latest events in the hello. */
  helloEvents?: number;
}

export const WS_LIMITS = {
  updateIntervalMs: 250,
  skipBytes: 256 * 1024,
  dropBytes: 8 * 1024 * 1024,
  heartbeatMs: 15_000,
  beatMs: 5_000,
  maxClients: 100,
  maxPayloadBytes: 4096,
  helloEvents: 100,
} as const;

/** The part of a ws WebSocket the hub uses (tests stand in for it). */
export interface HubSocket {
  readonly readyState: number;
  readonly OPEN: number;
  readonly bufferedAmount: number;
  send(text: string): void;
  ping(): void;
  terminate(): void;
  on(event: 'pong' | 'close' | 'error' | 'message', listener: (...args: unknown[]) => void): unknown;
}

interface Client {
  socket: HubSocket;
  alive: boolean;
  sent: Map<string, number>;
  /** The text of each derived result last sent to this client. */
  derivedSent: Map<string, string>;
  lastSendMs: number;
}

export interface HubCounters {
  clients: number;
  connected: number;
  refused: number;
  skipped: number;
  dropped: number;
  messages: number;
}

export class WsHub {
  private readonly server: WebSocketServer;
  private readonly clients = new Set<Client>();
  private readonly daemon: DaemonApi;
  private readonly settings: Required<WsHubOptions>;
  private readonly timers: NodeJS.Timeout[] = [];
  /** Per channel: the summary, what it was made from (the channel's version, its intake totals) and a stamp clients compare. */
  private summaryStamp = 0;
  private readonly summaries = new Map<string, { version: number; channelVersion: number; intakeKey: string; summary: ChannelSummary & { unit: string | null; unitLabel?: string | null; unitNote?: string | null; intake?: IntakeBrief } }>();
  private readonly unsubscribe: (() => void)[];
  private testPointsChanged = false;
  private closed = false;
  readonly counters = { connected: 0, refused: 0, skipped: 0, dropped: 0, messages: 0 };

  constructor(daemon: DaemonApi, options: WsHubOptions = {}) {
    this.daemon = daemon;
    this.settings = {
      updateIntervalMs: options.updateIntervalMs ?? WS_LIMITS.updateIntervalMs,
      skipBytes: options.skipBytes ?? WS_LIMITS.skipBytes,
      dropBytes: options.dropBytes ?? WS_LIMITS.dropBytes,
      heartbeatMs: options.heartbeatMs ?? WS_LIMITS.heartbeatMs,
      beatMs: options.beatMs ?? WS_LIMITS.beatMs,
      maxClients: options.maxClients ?? WS_LIMITS.maxClients,
      helloEvents: options.helloEvents ?? WS_LIMITS.helloEvents,
    };
    this.server = new WebSocketServer({ noServer: true, maxPayload: WS_LIMITS.maxPayloadBytes, perMessageDeflate: false });
    this.unsubscribe = [daemon.onEvent((event) => this.broadcastEvent(event)), daemon.onHealth((health) => this.broadcastHealth(health))];
    this.timers.push(setInterval(() => this.tick(), this.settings.updateIntervalMs));
    this.timers.push(setInterval(() => this.heartbeat(), this.settings.heartbeatMs));
    for (const timer of this.timers) timer.unref();
  }

  /** Hands an HTTP upgrade request for /ws to the hub. */
  handleUpgrade(request: IncomingMessage, socket: Duplex, head: Buffer): void {
    const refuse = (status: number, reason: string) => {
      this.counters.refused++;
      socket.end(`HTTP/1.1 ${status} ${reason}\r\nConnection: close\r\nContent-Type: text/plain\r\nContent-Length: ${reason.length}\r\n\r\n${reason}`);
    };
    if (this.closed) return refuse(503, 'Service Unavailable');
    const origin = request.headers.origin;
    if (origin !== undefined && !sameOrigin(origin, request.headers.host)) return refuse(403, 'Forbidden');
    if (this.clients.size >= this.settings.maxClients) return refuse(503, 'Service Unavailable');
    this.server.handleUpgrade(request, socket, head, (ws: WebSocket) => this.attach(ws));
  }

  get clientCount(): number {
    return this.clients.size;
  }

  stats(): HubCounters {
    return { clients: this.clients.size, ...this.counters };
  }

  /** Ends every connection (clients reconnect by themselves). */
  disconnectAll(): void {
    for (const client of this.clients) client.socket.terminate();
    this.clients.clear();
  }

  close(): void {
    this.closed = true;
    for (const timer of this.timers) clearInterval(timer);
    for (const unsubscribe of this.unsubscribe) unsubscribe();
    this.disconnectAll();
    this.server.close();
  }

  /** Takes over an open socket: sends the hello, then keeps it updated. */
  attach(socket: HubSocket): void {
    const client: Client = { socket, alive: true, sent: new Map(), derivedSent: new Map(), lastSendMs: 0 };
    this.clients.add(client);
    this.counters.connected++;
    socket.on('pong', () => {
      client.alive = true;
    });
    socket.on('close', () => this.clients.delete(client));
    socket.on('error', () => this.clients.delete(client));
    // Clients have nothing to say: any message is ignored (ws closes on frames above maxPayload).
    socket.on('message', () => undefined);
    this.refreshSummaries();
    const channels: ChannelSummary[] = [];
    for (const [name, entry] of this.summaries) {
      channels.push(entry.summary);
      client.sent.set(name, entry.version);
    }
    const derived = this.derivedTexts();
    for (const [name, text] of derived) client.derivedSent.set(name, text);
    const lastEventId = this.daemon.lastEventId;
    const recent = this.daemon.latestEvents(this.settings.helloEvents);
    this.send(client, {
      type: 'hello',
      protocol: 1,
      serverTimeMs: Date.now(),
      channels,
      derived: [...derived.values()].map((text) => JSON.parse(text) as unknown),
      lastEventId,
      events: recent,
      testPoints: this.testPoints(),
      acknowledgements: this.daemon.acknowledgementsAfter((recent[0]?.id ?? lastEventId + 1) - 1),
      health: this.daemon.health(),
      updateIntervalMs: this.settings.updateIntervalMs,
    }, true);
  }

  /** Each derived result as JSON text (the text tells whether it changed since a client's last one). */
  private derivedTexts(): Map<string, string> {
    const out = new Map<string, string>();
    for (const view of this.daemon.derivedResults()) out.set(view.name, JSON.stringify(view, finite));
    return out;
  }

  private testPoints(): unknown[] {
    return this.daemon.testPointViews();
  }

  private broadcastHealth(health: DaemonHealth): void {
    const text = JSON.stringify({ type: 'health', health }, finite);
    for (const client of this.clients) this.sendText(client, text, true);
  }

  private broadcastEvent(event: StoredEvent): void {
    // Channel events change channel states, hence test-point verdicts.
    this.testPointsChanged = true;
    const text = JSON.stringify({ type: 'event', event }, finite);
    for (const client of this.clients) this.sendText(client, text, true);
  }

  /** Recomputes the summary of every channel with new samples or events. */
  private refreshSummaries(): void {
    for (const channel of this.daemon.channels()) {
      const version = channel.version;
      const entry = this.summaries.get(channel.name);
      // Refusals and gaps change without a new sample of the channel: their totals are compared too.
      const intake = channel.intakeBrief?.();
      const intakeKey = intake === undefined ? '' : `${intake.refused}:${intake.gaps}:${intake.missingSamples}`;
      if (entry && entry.channelVersion === version && entry.summary.unit === channel.unit && entry.intakeKey === intakeKey) continue;
      this.summaryStamp++;
      this.summaries.set(channel.name, { version: this.summaryStamp, channelVersion: version, intakeKey, summary: { ...channel.summary(), unit: channel.unit, unitLabel: channel.unit === null ? null : unitLabel(channel.unit), unitNote: channel.unitNote, ...(intake !== undefined ? { intake } : {}) } });
    }
  }

  private tick(): void {
    if (this.clients.size === 0) return;
    const now = Date.now();
    this.refreshSummaries();
    const derived = this.derivedTexts();
    const testPointsText = this.testPointsChanged ? JSON.stringify({ type: 'testPoints', testPoints: this.testPoints() }, finite) : null;
    this.testPointsChanged = false;
    for (const client of this.clients) {
      if (testPointsText) this.sendText(client, testPointsText, false);
      let sent = false;
      const changed: ChannelSummary[] = [];
      const versions: [string, number][] = [];
      for (const [name, entry] of this.summaries) {
        if (client.sent.get(name) !== entry.version) {
          changed.push(entry.summary);
          versions.push([name, entry.version]);
        }
      }
      if (changed.length > 0) {
        sent = true;
        if (this.send(client, { type: 'channels', serverTimeMs: now, channels: changed }, false)) for (const [name, version] of versions) client.sent.set(name, version);
      }
      const changedDerived = [...derived].filter(([name, text]) => client.derivedSent.get(name) !== text);
      if (changedDerived.length > 0) {
        sent = true;
        // The texts are the results' JSON already: joined, not serialised again.
        const text = `{"type":"derived","serverTimeMs":${now},"derived":[${changedDerived.map(([, t]) => t).join(',')}]}`;
        if (this.sendText(client, text, false)) for (const [name, t] of changedDerived) client.derivedSent.set(name, t);
      }
      if (!sent && now - client.lastSendMs >= this.settings.beatMs) this.send(client, { type: 'beat', serverTimeMs: now }, false);
    }
  }

  private send(client: Client, message: unknown, important: boolean): boolean {
    return this.sendText(client, JSON.stringify(message, finite), important);
  }

  /** Sends unless the client is too far behind; returns whether the text went out. */
  private sendText(client: Client, text: string, important: boolean): boolean {
    const socket = client.socket;
    if (socket.readyState !== socket.OPEN) return false;
    if (socket.bufferedAmount > this.settings.dropBytes) {
      this.counters.dropped++;
      socket.terminate();
      this.clients.delete(client);
      return false;
    }
    if (!important && socket.bufferedAmount > this.settings.skipBytes) {
      this.counters.skipped++;
      // Forget what was sent: the first update after it drains carries every channel and derived result.
      client.sent.clear();
      client.derivedSent.clear();
      return false;
    }
    socket.send(text);
    client.lastSendMs = Date.now();
    this.counters.messages++;
    return true;
  }

  private heartbeat(): void {
    for (const client of this.clients) {
      if (!client.alive) {
        client.socket.terminate();
        this.clients.delete(client);
        continue;
      }
      client.alive = false;
      try {
        client.socket.ping();
      } catch {
        this.clients.delete(client);
      }
    }
  }
}

function finite(_key: string, value: unknown): unknown {
  return typeof value === 'number' && !Number.isFinite(value) ? null : value;
}
