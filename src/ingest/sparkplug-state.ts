/**
 * What the Sparkplug decoder remembers of one edge node (Sparkplug B: a node publishes NBIRTH with
 * its metrics, their aliases and its bdSeq, then NDATA, and for each device DBIRTH, DDATA, DDEATH;
 * its NDEATH, the MQTT will, repeats the birth's bdSeq). Aliases are unique across a node and its
 * devices, so one table per node serves both.
 *
 * The sequence number (0..255, NBIRTH carries 0) goes up by one, wrapping after 255, with every
 * message of the node after its birth (DBIRTH, NDATA, DDATA, DDEATH). A jump means messages were
 * lost: the node "needs rebirth" until its next NBIRTH, and so does an alias the node never
 * announced.
 */
export interface MetricInfo {
  /** The metric's name as announced at birth. */
  name: string;
  /** Device id, or null for the node's own metrics. */
  device: string | null;
  /** Sparkplug data type code announced at birth (0 when none was given). */
  datatype: number;
  /** The channel its samples go to, or null when the name gives no valid channel. */
  channel: string | null;
  /** Its data type is a number type (or none was announced): it can have samples. */
  numeric: boolean;
}

/** An edge node's sequence state as plain data (small: written with every commit after a message of the node). */
export interface EdgeNodeSeqState {
  record: 'sparkplug-node';
  version: 1;
  group: string;
  node: string;
  born: boolean;
  bdSeq: number | null;
  lastSeq: number;
  needsRebirth: boolean;
  rebirthCause: string;
  rebirthRequestedAt: number | null;
}

/** What an edge node's births announced, as plain data (written only when a birth or death changed it). */
export interface EdgeNodeTablesState {
  record: 'sparkplug-tables';
  version: 1;
  /** Every metric the tables hold. */
  metrics: MetricInfo[];
  /** Indices into `metrics` of the names table, in its order. */
  names: number[];
  /** [alias, index into `metrics`]. */
  aliases: [number, number][];
  devices: string[];
}

export class EdgeNodeState {
  readonly group: string;
  readonly node: string;
  /** An NBIRTH was seen and no matching NDEATH since. */
  born = false;
  /** bdSeq of the current birth (null: the birth carried none). */
  bdSeq: number | null = null;
  /** seq of the last message of the node (-1: none since birth). */
  lastSeq = -1;
  needsRebirth = false;
  /** Why the node needs a rebirth (for the log and the counters). */
  rebirthCause = '';
  /** Arrival time of the last rebirth request sent for it (NaN: none in this episode). */
  rebirthRequestedAt = Number.NaN;
  readonly aliases = new Map<number, MetricInfo>();
  /** Metrics by device ('' for the node) and name. */
  readonly names = new Map<string, MetricInfo>();
  /** Devices that sent a DBIRTH since the node's birth and no DDEATH since. */
  readonly devices = new Set<string>();
  /** Counts the changes of the tables (aliases, names, devices): they are saved only when it moved. */
  tablesVersion = 0;

  constructor(group: string, node: string) {
    this.group = group;
    this.node = node;
  }

  /** A new NBIRTH: everything learned before is forgotten. */
  birth(bdSeq: number | null, seq: number): void {
    this.born = true;
    this.bdSeq = bdSeq;
    this.lastSeq = seq;
    this.needsRebirth = false;
    this.rebirthCause = '';
    this.rebirthRequestedAt = Number.NaN;
    this.aliases.clear();
    this.names.clear();
    this.devices.clear();
    this.tablesVersion++;
  }

  /** A device's DBIRTH: its earlier metrics are forgotten. */
  deviceBirth(device: string): void {
    for (const [alias, info] of this.aliases) if (info.device === device) this.aliases.delete(alias);
    for (const [key, info] of this.names) if (info.device === device) this.names.delete(key);
    this.devices.add(device);
    this.tablesVersion++;
  }

  /** A device's DDEATH. */
  deviceDeath(device: string): void {
    this.devices.delete(device);
    this.tablesVersion++;
  }

  learn(info: MetricInfo, alias: number | null): void {
    this.names.set(nameKey(info.device, info.name), info);
    if (alias !== null) this.aliases.set(alias, info);
    this.tablesVersion++;
  }

  seqState(): EdgeNodeSeqState {
    return {
      record: 'sparkplug-node',
      version: 1,
      group: this.group,
      node: this.node,
      born: this.born,
      bdSeq: this.bdSeq,
      lastSeq: this.lastSeq,
      needsRebirth: this.needsRebirth,
      rebirthCause: this.rebirthCause,
      rebirthRequestedAt: Number.isNaN(this.rebirthRequestedAt) ? null : this.rebirthRequestedAt,
    };
  }

  tablesState(): EdgeNodeTablesState {
    const index = new Map<MetricInfo, number>();
    const metrics: MetricInfo[] = [];
    const indexOf = (info: MetricInfo) => {
      let i = index.get(info);
      if (i === undefined) {
        i = metrics.length;
        index.set(info, i);
        metrics.push({ ...info });
      }
      return i;
    };
    const names = [...this.names.values()].map(indexOf);
    const aliases = [...this.aliases].map(([alias, info]): [number, number] => [alias, indexOf(info)]);
    return { record: 'sparkplug-tables', version: 1, metrics, names, aliases, devices: [...this.devices] };
  }

  /**
   * Continues from saved state (the tables, when saved: a node seen only without a birth has none).
   * @throws RangeError for records of another name or version, or ones that are not well formed.
   */
  load(seq: EdgeNodeSeqState, tables: EdgeNodeTablesState | null): void {
    if (seq?.record !== 'sparkplug-node' || seq.version !== 1) throw new RangeError('not a sparkplug-node record of version 1');
    if (!Number.isInteger(seq.lastSeq) || seq.lastSeq < -1 || seq.lastSeq > 255) throw new RangeError('sparkplug-node record: seq out of range');
    this.born = seq.born === true;
    this.bdSeq = seq.bdSeq;
    this.lastSeq = seq.lastSeq;
    this.needsRebirth = seq.needsRebirth === true;
    this.rebirthCause = String(seq.rebirthCause ?? '');
    this.rebirthRequestedAt = seq.rebirthRequestedAt ?? Number.NaN;
    this.aliases.clear();
    this.names.clear();
    this.devices.clear();
    if (tables === null) return;
    if (tables?.record !== 'sparkplug-tables' || tables.version !== 1) throw new RangeError('not a sparkplug-tables record of version 1');
    const infos = tables.metrics.map((m) => ({ name: String(m.name), device: m.device === null ? null : String(m.device), datatype: Number(m.datatype), channel: m.channel === null ? null : String(m.channel), numeric: m.numeric === true }));
    const at = (i: number) => {
      const info = infos[i];
      if (info === undefined) throw new RangeError('sparkplug-tables record: index out of range');
      return info;
    };
    for (const i of tables.names) {
      const info = at(i);
      this.names.set(nameKey(info.device, info.name), info);
    }
    for (const [alias, i] of tables.aliases) this.aliases.set(alias, at(i));
    for (const device of tables.devices) this.devices.add(String(device));
  }

  lookup(device: string | null, name: string | null, alias: number | null): MetricInfo | undefined {
    if (name !== null) return this.names.get(nameKey(device, name));
    if (alias !== null) {
      const info = this.aliases.get(alias);
      return info !== undefined && info.device === device ? info : undefined;
    }
    return undefined;
  }

  /**
   * Checks a message's seq against the last one: the number of messages missing between them
   * (0 when it follows, 1..255 otherwise; a repeat counts as 255 missing, as it cannot be told
   * from a full turn of the counter).
   */
  advance(seq: number): number {
    const expected = (this.lastSeq + 1) & 0xff;
    this.lastSeq = seq;
    return (seq - expected + 256) & 0xff;
  }

  markNeedsRebirth(cause: string): boolean {
    const first = !this.needsRebirth;
    this.needsRebirth = true;
    if (first) this.rebirthCause = cause;
    return first;
  }

  /** Channels of the node's metrics, or of one device's. */
  channels(device?: string): string[] {
    const out = new Set<string>();
    for (const info of this.names.values()) if (info.channel !== null && info.numeric && (device === undefined || info.device === device)) out.add(info.channel);
    return [...out];
  }
}

function nameKey(device: string | null, name: string): string {
  return `${device ?? ''}\u0000${name}`;
}
