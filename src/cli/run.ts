import { parseArgs } from 'node:util';
import type { Logger } from 'pino';
import { loadConfigFile } from '../config/load-config.js';
import { Daemon } from '../daemon/daemon.js';
import { startServer } from '../server/server.js';
import { startEmbeddedBroker, type EmbeddedBroker } from '../ingest/embedded-broker.js';
import { UsageError } from './cli-error.js';
import { CAUTION } from './caution.js';

export const RUN_HELP = `plateau run --config FILE

Runs the daemon: subscribes to the configured MQTT topics, keeps every channel's statistics in
SQLite (a restart continues where it stopped), serves the API and the dashboard, and publishes
events and a retained status per channel and test point. Stops cleanly on SIGINT or SIGTERM.
`;

/** Starts the daemon from a config file; resolves when it has stopped (on a signal). */
export async function runDaemonCommand(argv: string[]): Promise<number> {
  const { values } = parseArgs({ args: argv, options: { config: { type: 'string', short: 'c' }, help: { type: 'boolean', short: 'h', default: false } } });
  if (values.help) {
    process.stdout.write(RUN_HELP);
    return 0;
  }
  if (!values.config) throw new UsageError('run needs a configuration: plateau run --config FILE (examples in config/)');
  const config = loadConfigFile(values.config);
  let broker: EmbeddedBroker | null = null;
  if (config.broker.url === 'embedded') broker = await startEmbeddedBroker({ port: 1883 });
  const daemon = new Daemon(config, broker ? { brokerUrl: broker.url } : {});
  await daemon.start();
  const server = await startServer(daemon, { host: config.http.host, port: config.http.port, token: config.http.token, maxBodyBytes: config.http.maxBodyBytes, log: daemon.log });
  daemon.log.info({ url: server.url, broker: broker?.url ?? config.broker.url }, 'plateau is running');
  process.stderr.write(`plateau: dashboard at ${server.url}  (broker ${broker?.url ?? config.broker.url})\n${CAUTION}\n`);
  return waitForSignal(async () => {
    await server.close();
    await daemon.stop();
    await broker?.close();
  }, daemon.log);
}

export function waitForSignal(shutdown: () => Promise<void>, log?: Logger): Promise<number> {
  return new Promise((resolve) => {
    let stopping = false;
    const stop = (signal: string) => {
      if (stopping) return;
      stopping = true;
      process.stderr.write(`plateau: ${signal}, stopping\n`);
      shutdown().then(
        () => resolve(0),
        (error: Error) => {
          log?.error({ err: error }, 'error while stopping');
          process.stderr.write(`plateau: error while stopping: ${error.message}\n`);
          resolve(1);
        },
      );
    };
    process.once('SIGINT', () => stop('SIGINT'));
    process.once('SIGTERM', () => stop('SIGTERM'));
  });
}
