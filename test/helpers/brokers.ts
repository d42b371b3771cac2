import { connect } from 'node:net';
import mqtt, { type MqttClient } from 'mqtt';

/** True when a broker answers at host:port (Mosquitto at 127.0.0.1:1883 on the CI machine). */
export function brokerReachable(host = '127.0.0.1', port = 1883, timeoutMs = 500): Promise<boolean> {
  return new Promise((resolve) => {
    const socket = connect({ host, port });
    const done = (ok: boolean) => {
      socket.destroy();
      resolve(ok);
    };
    socket.setTimeout(timeoutMs, () => done(false));
    socket.once('connect', () => done(true));
    socket.once('error', () => done(false));
  });
}

export async function mqttClient(url: string, clientId: string, options: mqtt.IClientOptions = {}): Promise<MqttClient> {
  const client = mqtt.connect(url, { clientId, clean: true, reconnectPeriod: 200, ...options });
  await new Promise<void>((resolve, reject) => {
    client.once('connect', () => resolve());
    client.once('error', reject);
  });
  return client;
}

export function publishAsync(client: MqttClient, topic: string, payload: string | Buffer, qos: 0 | 1 = 1): Promise<void> {
  return new Promise((resolve, reject) => client.publish(topic, payload, { qos }, (error) => (error ? reject(error) : resolve())));
}

export async function waitFor(condition: () => boolean | Promise<boolean>, timeoutMs: number, what: string, pollMs = 25): Promise<void> {
  const end = Date.now() + timeoutMs;
  for (;;) {
    // A condition that never answers (a request to a server that is gone) counts against the same limit.
    if (await within(Math.max(1, end - Date.now()), `${what} (a check that did not answer)`, Promise.resolve(condition()), timeoutMs)) return;
    if (Date.now() > end) throw new Error(`timed out after ${timeoutMs} ms waiting for ${what}`);
    await new Promise((resolve) => setTimeout(resolve, pollMs));
  }
}

/**
 * The promise's value, or an error naming `what` when it has not settled within `ms`: every wait
 * of a test that talks to servers is bounded, so a hang fails with a message saying where.
 */
export function within<T>(ms: number, what: string, promise: Promise<T>, reportMs = ms): Promise<T> {
  let timer: NodeJS.Timeout | undefined;
  const limit = new Promise<never>((_, reject) => {
    timer = setTimeout(() => reject(new Error(`timed out after ${reportMs} ms waiting for ${what}`)), ms);
  });
  return Promise.race([promise, limit]).finally(() => clearTimeout(timer));
}

export function unique(prefix: string): string {
  return `${prefix}-${process.pid}-${Date.now().toString(36)}-${Math.floor(Math.random() * 1e6).toString(36)}`;
}
