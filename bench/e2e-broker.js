// The embedded broker (aedes) in its own process for bench/e2e.js, so the broker and the daemon do
// not share a core. Prints its URL.
import { startEmbeddedBroker } from '../dist/ingest/embedded-broker.js';

const broker = await startEmbeddedBroker({ port: 0 });
process.stdout.write(`${broker.url}\n`);
process.on('SIGTERM', async () => {
  await broker.close();
  process.exit(0);
});
