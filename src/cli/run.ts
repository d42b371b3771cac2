import { readCommandArgs } from './command-args.js';
import type { Logger } from 'pino';
import { loadConfigFile } from '../config/load-config.js';
import { Daemon } from '../daemon/daemon.js';
import { startServer, type RunningServer } from '../server/server.js';
import { startEmbeddedBroker, type EmbeddedBroker } from '../ingest/embedded-broker.js';
import { UsageError } from './cli-error.js';
import { CAUTION } from './caution.js';
import { RUN_HELP } from './daemon-help.js';

export { RUN_HELP };

/** Starts the daemon from a config file; resolves when it has stopped (on a signal). */
export async function runDaemonCommand(argv: string[]): Promise<number> {
  const { values: parsed } = readCommandArgs('run', argv, { config: { type: 'string', short: 'c' }, help: { type: 'boolean', short: 'h' } }, false);
  const values = parsed as { config?: string; help?: boolean };
  if (values.help) {
    process.stdout.write(RUN_HELP);
    return 0;
  }
  if (!values.config) throw new UsageError('run needs a configuration: plateau run --config FILE (examples in config/)');
  const config = loadConfigFile(values.config);
  let broker: EmbeddedBroker | null = null;
  if (config.broker.url === 'embedded') broker = await startEmbeddedBroker({ port: 1883 });
  let daemon: Daemon | null = null;
  let server: RunningServer;
  try {
    daemon = new Daemon(config, broker ? { brokerUrl: broker.url } : {});
    await daemon.start();
    server = await startServer(daemon, { host: config.http.host, port: config.http.port, token: config.http.token, maxBodyBytes: config.http.maxBodyBytes, log: daemon.log });
  } catch (error) {
    // Whatever failed, nothing is left listening: the command ends with the error's exit status.
    await daemon?.stop().catch(() => undefined);
    await broker?.close().catch(() => undefined);
    throw error;
  }
  daemon.log.info({ url: server.url, broker: broker?.url ?? config.broker.url }, 'plateau is running');
  process.stderr.write(`plateau: dashboard at ${server.url}  (broker ${broker?.url ?? config.broker.url})\n${CAUTION}\n`);
  const running = daemon;
  return waitForSignal(async () => {
    await server.close();
    await running.stop();
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
