import type { DecoderSpec } from './decoder-spec.js';
import type { EstimatorName } from '../core/tau/tau-estimate.js';
import type { WarmupSetting } from '../engine/warmup-detector.js';
import type { TargetSpec } from '../core/uncertainty/target-precision.js';
import type { ConformitySpec, WindowSpec } from '../engine/channel-options.js';
import type { CriteriaSettings } from './criteria-config.js';
import type { ScaleConfig } from './scale-config.js';
import type { TypeBSpec } from '../core/uncertainty/type-b-component.js';

/** The daemon's whole configuration, after validation and defaults. Units are in the key names. */
export interface PlateauConfig {
  /** Where the file came from, for messages. */
  source: string;
  broker: BrokerConfig;
  /** The rig: its identification on every record (null when the configuration names none). */
  rig?: { id: string | null; name: string | null };
  subscriptions: SubscriptionConfig[];
  channels: { defaults: ChannelSettings; groups: ChannelGroup[] };
  derived: DerivedConfig[];
  store: StoreConfig;
  http: HttpConfig;
  topics: TopicsConfig;
  log: { level: 'fatal' | 'error' | 'warn' | 'info' | 'debug' | 'trace' | 'silent' };
  /** Present when broker.url is nats://: JetStream ingest with partitions and leases. */
  scale?: ScaleConfig;
}

export interface BrokerConfig {
  /** mqtt://host:port, mqtts://host:port, "embedded" for the in-process broker, or nats:// URLs joined by commas (see `scale`). */
  url: string;
  clientId: string;
  username: string | null;
  password: string | null;
  tls: { caFile: string | null; certFile: string | null; keyFile: string | null; rejectUnauthorized: boolean } | null;
  /** 4 = MQTT 3.1.1, 5 = MQTT 5. */
  protocolVersion: 4 | 5;
  qos: 0 | 1;
  /** MQTT 5 session expiry; MQTT 3.1.1 sessions persist until the broker drops them. */
  sessionExpirySeconds: number;
  keepaliveSeconds: number;
  reconnectPeriodMs: number;
}

export interface SubscriptionConfig extends DecoderSpec {
  topic: string;
}

export interface ChannelSettings {
  window: WindowSpec;
  maxLag: number;
  estimator: EstimatorName;
  /** How the warm-up is found: auto (fitted and cut), none (every sample as given) or a fixed count. */
  warmup: WarmupSetting;
  confidence: number;
  target: TargetSpec | null;
  /** Mean samples between false stationarity alarms on a stationary channel. */
  falseAlarmSamples: number;
  /** No data for this long makes the channel stale. */
  staleSeconds: number;
  /** Samples per second, when the rig states it (otherwise from timestamps). */
  rate: number | null;
  /** Physical range of the channel, used to check derived expressions for division by zero. */
  range: [number, number] | null;
  unit: string | null;
  /** Stability rules from the test procedure and the readiness policy (criteria-config.ts); null: none. */
  criteria: CriteriaSettings | null;
  /** Type B components of the channel (a group's list replaces the defaults' list). */
  typeB: TypeBSpec[];
  /** Specification limits and decision rule. */
  conformity: ConformitySpec | null;
  /** Target on the combined uncertainty (u_c or U). */
  combinedTarget: TargetSpec | null;
  /** f of the stopping rule u_A <= f u_c. */
  dominanceFraction: number | null;
  /** Propose the resolution component when the readings lie on a coarse lattice. */
  proposeResolution: boolean;
}

export interface ChannelGroup {
  /** Glob over channel names: * matches any run of characters, ? one character. */
  match: string;
  settings: Partial<ChannelSettings>;
}

export interface DerivedConfig {
  name: string;
  unit: string | null;
  expression: string;
  target: TargetSpec | null;
  confidence: number;
  /** Specification limits and decision rule of the result. */
  conformity: ConformitySpec | null;
  /** Target on the combined uncertainty of the result. */
  combinedTarget: TargetSpec | null;
  /** Named constants with a value and a standard uncertainty (GUM H.1), usable in the expression. */
  constants: DerivedConstantConfig[];
  /** Key path in the config file, for messages. */
  keyPath: string;
}

export interface StoreConfig {
  /** SQLite file; ":memory:" keeps nothing across restarts. */
  path: string;
  /** Samples older than this are deleted (never those a channel still needs to rebuild its state). */
  retentionSeconds: number;
  /**
   * Longest wait, in milliseconds, before accepted samples are committed when no MQTT acknowledgement
   * is waiting on them (QoS 0); held acknowledgements make the commit immediate.
   */
  flushIntervalMs: number;
  /** A channel's state is checkpointed after this many samples (and every two window lengths). */
  checkpointSamples: number;
}

export interface HttpConfig {
  host: string;
  port: number;
  /** Required for every write when the server listens beyond loopback. */
  token: string | null;
  maxBodyBytes: number;
}

export interface TopicsConfig {
  /** Every event, as JSON. */
  events: string;
  /** Retained per-channel and per-test-point status: <status>/channel/<name>, <status>/test-point/<id>. */
  status: string;
  /** Commands from a rig sequencer: <command>/test-point/start, .../stop. */
  command: string;
}

/** A named constant of derived expressions: its value and its uncertainty as a Type B spec. */
export interface DerivedConstantConfig {
  name: string;
  value: number;
  /** The constant's uncertainty (its `name` is the constant's). */
  uncertainty: TypeBSpec;
}
