import mqtt, { type MqttClient } from 'mqtt';
import { RigSimulator, type SimulatedSample } from './rig-simulator.js';

/**
 * Publishes the simulated rig over MQTT: JSON {"v", "t"} per sample on rig/hx7/<channel> for the
 * fast channels, and a SenML pack every five simulated seconds on rig/hx7/senml for the ambient
 * channel. `speed` simulated seconds pass per wall-clock second (1 = real time).
 */
export interface RigPublisherOptions {
  url: string;
  speed: number;
  seed?: number;
  rate?: number;
  driftAfterSeconds?: number;
  topicPrefix?: string;
  clientId?: string;
}

export class RigPublisher {
  private client: MqttClient | null = null;
  private timer: NodeJS.Timeout | null = null;
  private readonly options: RigPublisherOptions;
  private simulator: RigSimulator | null = null;
  private wallStart = 0;
  private ambientPack: SimulatedSample[] = [];
  published = 0;

  constructor(options: RigPublisherOptions) {
    this.options = options;
  }

  async start(): Promise<void> {
    const client = mqtt.connect(this.options.url, { clientId: this.options.clientId ?? `hx7-sim-${process.pid}`, clean: true, reconnectPeriod: 1000 });
    this.client = client;
    await new Promise<void>((resolve, reject) => {
      client.once('connect', () => resolve());
      client.once('error', reject);
    });
    this.wallStart = Date.now();
    this.simulator = new RigSimulator({
      seed: this.options.seed ?? 7,
      rate: this.options.rate ?? 10,
      startSeconds: this.wallStart / 1000,
      ...(this.options.driftAfterSeconds !== undefined ? { driftAfterSeconds: this.options.driftAfterSeconds } : {}),
    });
    this.timer = setInterval(() => this.tick(), 50);
  }

  private tick(): void {
    const simulator = this.simulator;
    const client = this.client;
    if (!simulator || !client || !client.connected) return;
    const prefix = this.options.topicPrefix ?? 'rig/hx7';
    const simulatedNow = this.wallStart / 1000 + ((Date.now() - this.wallStart) / 1000) * this.options.speed;
    let budget = 20_000; // steps per tick at most, so a huge speed cannot starve the event loop
    while (simulator.nextTime <= simulatedNow && budget-- > 0) {
      for (const sample of simulator.next()) {
        if (sample.channel === 'ambient_degC') {
          this.ambientPack.push(sample);
          if (this.ambientPack.length >= 5) this.flushAmbient(prefix);
          continue;
        }
        client.publish(`${prefix}/${sample.channel}`, JSON.stringify({ v: sample.value, t: sample.timeSeconds }), { qos: 1 });
        this.published++;
      }
    }
  }

  private flushAmbient(prefix: string): void {
    const pack = this.ambientPack;
    this.ambientPack = [];
    const base = pack[0] as SimulatedSample;
    const records = pack.map((s, i) => (i === 0 ? { bn: 'hx7.', bt: base.timeSeconds, bu: 'Cel', n: s.channel, v: s.value } : { n: s.channel, t: s.timeSeconds - base.timeSeconds, v: s.value }));
    this.client?.publish(`${prefix}/senml`, JSON.stringify(records), { qos: 1 });
    this.published += pack.length;
  }

  async stop(): Promise<void> {
    if (this.timer) clearInterval(this.timer);
    const client = this.client;
    this.client = null;
    if (client) await new Promise<void>((resolve) => client.end(false, {}, () => resolve()));
  }
}
