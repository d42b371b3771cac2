import { readCommandArgs } from './command-args.js';
import { fileURLToPath } from 'node:url';
import { dirname, join } from 'node:path';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { loadConfigFile } from '../config/load-config.js';
import { Daemon } from '../daemon/daemon.js';
import { startServer, type RunningServer } from '../server/server.js';
import { startEmbeddedBroker, type EmbeddedBroker } from '../ingest/embedded-broker.js';
import { RigPublisher } from '../sim/rig-publisher.js';
import { UsageError } from './cli-error.js';
import { CAUTION } from './caution.js';
import { DEMO_HELP } from './daemon-help.js';
import { waitForSignal } from './run.js';

export { DEMO_HELP };

const root = join(dirname(fileURLToPath(import.meta.url)), '..', '..');

export interface DemoHandle {
  broker: EmbeddedBroker;
  daemon: Daemon;
  server: RunningServer;
  publisher: RigPublisher;
  stop(): Promise<void>;
}

export interface DemoOptions {
  speed: number;
  brokerPort: number;
  httpPort: number;
  /** A SQLite file to use and keep; without it, a temporary directory deleted by stop() unless keepStore. */
  store?: string;
  keepStore?: boolean;
  logLevel?: string;
}

export async function startDemo(options: DemoOptions): Promise<DemoHandle & { logFile: string; temporary: string | null }> {
  const config = loadConfigFile(join(root, 'config', 'hx7-heat-exchanger.yaml'));
  const broker = await startEmbeddedBroker({ port: options.brokerPort });
  const temporary = options.store === undefined ? mkdtempSync(join(tmpdir(), 'plateau-demo-')) : null;
  const store = options.store ?? join(temporary as string, 'hx7.sqlite');
  const logFile = join(dirname(store), 'plateau-demo.log');
  const demoConfig = { ...config, broker: { ...config.broker, url: broker.url, clientId: `plateau-demo-${process.pid}` }, store: { ...config.store, path: store }, log: { level: (options.logLevel ?? 'info') as 'info' } };
  const daemon = new Daemon(demoConfig, { logFile });
  await daemon.start();
  const server = await startServer(daemon, { host: '127.0.0.1', port: options.httpPort, token: null, maxBodyBytes: config.http.maxBodyBytes, fallbackPort: true, log: daemon.log, sampleClock: `simulated time of the demo's rig (${options.speed}x real time)` });
  const publisher = new RigPublisher({ url: broker.url, speed: options.speed });
  await publisher.start();
  return {
    broker,
    daemon,
    server,
    publisher,
    logFile,
    temporary,
    stop: async () => {
      await publisher.stop();
      await server.close();
      await daemon.stop();
      await broker.close();
      if (temporary !== null && !options.keepStore) rmSync(temporary, { recursive: true, force: true });
    },
  };
}

export async function runDemoCommand(argv: string[]): Promise<number> {
  const { values: parsed } = readCommandArgs('demo', argv, {
      speed: { type: 'string' },
      'broker-port': { type: 'string' },
      'http-port': { type: 'string' },
      store: { type: 'string' },
      seconds: { type: 'string' },
      'keep-store': { type: 'boolean' },
      help: { type: 'boolean', short: 'h' },
  }, false);
  const values = parsed as Record<string, string | undefined> & { help?: boolean; 'keep-store'?: boolean };
  if (values.help) {
    process.stdout.write(DEMO_HELP);
    return 0;
  }
  const number = (name: string, raw: string | undefined, fallback: number, check: (v: number) => boolean, expected: string) => {
    if (raw === undefined) return fallback;
    const v = Number(raw);
    if (raw.trim() === '' || !Number.isFinite(v) || !check(v)) throw new UsageError(`--${name} ${raw}: expected ${expected}`);
    return v;
  };
  const speed = number('speed', values.speed, 1, (v) => v > 0 && v <= 1000, 'a number from 0 to 1000');
  const brokerPort = number('broker-port', values['broker-port'], 1883, (v) => Number.isInteger(v) && v >= 0 && v < 65536, 'a port number');
  const httpPort = number('http-port', values['http-port'], 8080, (v) => Number.isInteger(v) && v >= 0 && v < 65536, 'a port number');
  const seconds = number('seconds', values.seconds, 0, (v) => v >= 0, 'a number of seconds');
  const demo = await startDemo({ speed, brokerPort, httpPort, keepStore: values['keep-store'] === true, ...(values.store ? { store: values.store } : {}) });
  const notes: string[] = [];
  if (demo.broker.port !== brokerPort) notes.push(`port ${brokerPort} was busy, the broker took ${demo.broker.port}`);
  if (demo.server.port !== httpPort) notes.push(`port ${httpPort} was busy, the dashboard took ${demo.server.port}`);
  process.stdout.write(
    [
      'plateau demo: simulated bench HX-7 (glycol/water heat exchanger), six channels',
      `  dashboard  ${demo.server.url}`,
      `  broker     ${demo.broker.url} (embedded)  topics rig/hx7/#`,
      `  store      ${demo.daemon.config.store.path}${demo.temporary !== null ? (values['keep-store'] ? ' (kept after exit)' : ' (temporary: deleted on exit; --keep-store keeps it)') : ''}`,
      `  log        ${demo.logFile}`,
      `  speed      ${speed}x real time`,
      ...notes.map((n) => `  note       ${n}`),
      '  Start a test point from the dashboard, or:',
      `    curl -X POST ${demo.server.url}api/test-points -H 'content-type: application/json' -d '{"name":"HX-7 set point 1","channels":["hx7.glycol_in_degC","hx7.glycol_out_degC","hx7.glycol_flow_kg_s"]}'`,
      `  ${CAUTION}`,
      '  Ctrl-C stops.',
      '',
    ].join('\n'),
  );
  if (seconds > 0) {
    await new Promise((resolve) => setTimeout(resolve, seconds * 1000));
    await demo.stop();
    return 0;
  }
  return waitForSignal(() => demo.stop(), demo.daemon.log);
}
