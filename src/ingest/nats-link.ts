import { connect, type ConnectionOptions, type NatsConnection } from '@nats-io/transport-node';

/**
 * One connection to NATS (a server or a cluster) shared by the JetStream sample source and the
 * partition leases of a worker. The client reconnects by itself (forever, every `reconnectMs`);
 * this wrapper counts the reconnections and tells listeners when the connection goes and comes.
 */
export interface NatsLinkOptions {
  servers: string[];
  /** The client's name as the server shows it (the worker's). */
  name: string;
  username?: string | null;
  password?: string | null;
  /** TLS as for MQTT (`broker.tls`): a CA to trust, a client certificate and key (the server's certificate is always verified). */
  tls?: { caFile: string | null; certFile: string | null; keyFile: string | null; rejectUnauthorized: boolean } | null;
  /** Wait for the first connection at most this long (ms). */
  connectTimeoutMs?: number;
  reconnectMs?: number;
}

export class NatsLink {
  readonly servers: string[];
  private connection: NatsConnection | null = null;
  private listeners: ((connected: boolean, detail: string) => void)[] = [];
  private up = false;
  private reconnectCount = 0;
  private readonly options: NatsLinkOptions;

  constructor(options: NatsLinkOptions) {
    this.options = options;
    this.servers = options.servers;
  }

  /** Connects; rejects with the client's error when no server answers within the timeout. */
  async open(): Promise<NatsConnection> {
    if (this.connection) return this.connection;
    const options: ConnectionOptions = {
      servers: this.servers,
      name: this.options.name,
      timeout: this.options.connectTimeoutMs ?? 3000,
      maxReconnectAttempts: -1,
      reconnectTimeWait: this.options.reconnectMs ?? 250,
      pingInterval: 5000,
    };
    if (this.options.username) options.user = this.options.username;
    if (this.options.password) options.pass = this.options.password;
    const tls = this.options.tls;
    if (tls) {
      options.tls = {};
      if (tls.caFile) options.tls.caFile = tls.caFile;
      if (tls.certFile) options.tls.certFile = tls.certFile;
      if (tls.keyFile) options.tls.keyFile = tls.keyFile;
    }
    const nc = await connect(options);
    this.connection = nc;
    this.up = true;
    void this.watch(nc);
    return nc;
  }

  get nc(): NatsConnection {
    if (this.connection === null) throw new Error('the NATS link is not open');
    return this.connection;
  }

  get connected(): boolean {
    return this.up;
  }

  get reconnects(): number {
    return this.reconnectCount;
  }

  onConnection(listener: (connected: boolean, detail: string) => void): () => void {
    this.listeners.push(listener);
    return () => {
      this.listeners = this.listeners.filter((l) => l !== listener);
    };
  }

  /** Drops the connection and connects again (tests; an operator's "reconnect"). */
  async reconnect(): Promise<void> {
    await this.connection?.reconnect();
  }

  async close(): Promise<void> {
    const nc = this.connection;
    if (nc === null) return;
    this.connection = null;
    this.up = false;
    await nc.drain().catch(() => nc.close());
  }

  private async watch(nc: NatsConnection): Promise<void> {
    for await (const status of nc.status()) {
      if (status.type === 'disconnect') {
        this.up = false;
        for (const l of this.listeners) l(false, `disconnected from ${String((status as { server?: string }).server ?? '')}`);
      } else if (status.type === 'reconnect') {
        this.up = true;
        this.reconnectCount++;
        for (const l of this.listeners) l(true, `reconnected to ${String((status as { server?: string }).server ?? '')}`);
      }
    }
  }
}
