import { WebSocketServer, type WebSocket } from 'ws';
import type { IncomingMessage } from 'node:http';
import type { Duplex } from 'node:stream';
import type { Daemon, PublishedEvent } from '../daemon/daemon.js';
import type { ChannelSummary } from '../engine/channel-pipeline.js';

/**
 * The WebSocket hub (ws): events go to every client at once; channel updates go at most every
 * UPDATE_INTERVAL_MS per client, whatever the sample rate, carrying only the channels that changed.
 * A client that does not keep up is skipped (its socket buffer is over SKIP_BYTES) and dropped when
 * it falls far behind (over DROP_BYTES); nothing is buffered without bound. Dead peers are found by
 * ping/pong every HEARTBEAT_MS.
 *
 * Messages (JSON text frames), documented in the README:
 *   { "type": "hello", "channels": [summary...], "testPoints": [...], "lastEventId": n }
 *   { "type": "event", "event": { "id", "timeMs", "source", "kind", "at", "body" } }
 *   { "type": "channels", "channels": [summary...] }
 */
const UPDATE_INTERVAL_MS = 250;
const SKIP_BYTES = 1 << 20;
const DROP_BYTES = 16 << 20;
const HEARTBEAT_MS = 15_000;

interface Client {
  socket: WebSocket;
  alive: boolean;
  sent: Map<string, number>;
  skipped: number;
}

export class WsHub {
  private readonly server: WebSocketServer;
  private readonly clients = new Set<Client>();
  private readonly daemon: Daemon;
  private readonly timers: NodeJS.Timeout[] = [];
  private summaries = new Map<string, { received: number; events: number; summary: ChannelSummary }>();
  private readonly unsubscribe: () => void;
  dropped = 0;

  constructor(daemon: Daemon) {
    this.daemon = daemon;
    this.server = new WebSocketServer({ noServer: true, maxPayload: 4096 });
    this.unsubscribe = daemon.onEvent((event) => this.broadcastEvent(event));
    this.timers.push(setInterval(() => this.sendUpdates(), UPDATE_INTERVAL_MS));
    this.timers.push(setInterval(() => this.heartbeat(), HEARTBEAT_MS));
    for (const timer of this.timers) timer.unref();
  }

  handleUpgrade(request: IncomingMessage, socket: Duplex, head: Buffer): void {
    this.server.handleUpgrade(request, socket, head, (ws) => this.add(ws));
  }

  get clientCount(): number {
    return this.clients.size;
  }

  close(): void {
    for (const timer of this.timers) clearInterval(timer);
    this.unsubscribe();
    for (const client of this.clients) client.socket.terminate();
    this.server.close();
  }

  private add(socket: WebSocket): void {
    const client: Client = { socket, alive: true, sent: new Map(), skipped: 0 };
    this.clients.add(client);
    socket.on('pong', () => {
      client.alive = true;
    });
    socket.on('close', () => this.clients.delete(client));
    socket.on('error', () => this.clients.delete(client));
    // Clients have nothing to say: any message is ignored.
    socket.on('message', () => undefined);
    const channels = this.currentSummaries();
    for (const [name, entry] of this.summaries) client.sent.set(name, entry.received + entry.events * 1e12);
    this.send(client, {
      type: 'hello',
      channels,
      testPoints: this.daemon.testPoints.list().map((point) => ({ ...point, verdict: this.daemon.testPoints.verdict(point) })),
      lastEventId: this.daemon.events(0, 0).length,
    });
  }

  private broadcastEvent(event: PublishedEvent): void {
    const text = JSON.stringify({ type: 'event', event }, finite);
    for (const client of this.clients) this.sendText(client, text, true);
  }

  /** Summaries of every channel, recomputed only for channels with new samples or events. */
  private currentSummaries(): ChannelSummary[] {
    const out: ChannelSummary[] = [];
    for (const channel of this.daemon.registry.all()) {
      const received = channel.pipeline.totalReceived;
      const events = channel.pipeline.snapshotKeyEvents;
      let entry = this.summaries.get(channel.name);
      if (!entry || entry.received !== received || entry.events !== events) {
        entry = { received, events, summary: { ...channel.pipeline.summary(), ...({ unit: channel.unit } as object) } };
        this.summaries.set(channel.name, entry);
      }
      out.push(entry.summary);
    }
    return out;
  }

  private sendUpdates(): void {
    if (this.clients.size === 0) return;
    this.currentSummaries();
    for (const client of this.clients) {
      const changed: ChannelSummary[] = [];
      for (const [name, entry] of this.summaries) {
        const version = entry.received + entry.events * 1e12;
        if (client.sent.get(name) !== version) {
          changed.push(entry.summary);
          client.sent.set(name, version);
        }
      }
      if (changed.length > 0) this.send(client, { type: 'channels', channels: changed });
    }
  }

  private send(client: Client, message: unknown): void {
    this.sendText(client, JSON.stringify(message, finite), false);
  }

  private sendText(client: Client, text: string, important: boolean): void {
    const socket = client.socket;
    if (socket.readyState !== socket.OPEN) return;
    if (socket.bufferedAmount > DROP_BYTES) {
      this.dropped++;
      socket.terminate();
      this.clients.delete(client);
      return;
    }
    if (!important && socket.bufferedAmount > SKIP_BYTES) {
      client.skipped++;
      // Forget what was sent, so the next update carries every channel again.
      client.sent.clear();
      return;
    }
    socket.send(text);
  }

  private heartbeat(): void {
    for (const client of this.clients) {
      if (!client.alive) {
        client.socket.terminate();
        this.clients.delete(client);
        continue;
      }
      client.alive = false;
      client.socket.ping();
    }
  }
}

function finite(_key: string, value: unknown): unknown {
  return typeof value === 'number' && !Number.isFinite(value) ? null : value;
}
