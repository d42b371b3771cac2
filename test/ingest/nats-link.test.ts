import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { existsSync, mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { ScaleConfig } from '../../src/config/scale-config.js';
import { JetStreamWorker } from '../../src/ingest/jetstream-worker.js';
import { startOwnNatsServer, type OwnNatsServer } from '../helpers/nats-server.js';

// Credentials and TLS for a worker's NATS connection, as for MQTT (`broker.username`,
// `broker.password`, `broker.tls.caFile`): a nats-server of the test's own that requires a user and
// password over TLS, with a certificate authority and a server certificate made here by Debian's
// openssl for 127.0.0.1. Skipped with a message when nats-server or openssl is missing.

let server: OwnNatsServer | null = null;
let ca = '';
beforeAll(async () => {
  if (!existsSync('/usr/bin/openssl')) return console.log('openssl is not installed: the NATS TLS test is skipped');
  const dir = mkdtempSync(join(tmpdir(), 'plateau-nats-tls-'));
  const run = (...args: string[]) => execFileSync('/usr/bin/openssl', args, { cwd: dir, stdio: 'ignore' });
  run('req', '-x509', '-newkey', 'rsa:2048', '-nodes', '-keyout', 'ca.key', '-out', 'ca.pem', '-days', '1', '-subj', '/CN=plateau test CA');
  run('req', '-newkey', 'rsa:2048', '-nodes', '-keyout', 'server.key', '-out', 'server.csr', '-subj', '/CN=127.0.0.1');
  writeFileSync(join(dir, 'san.ext'), 'subjectAltName=IP:127.0.0.1,DNS:localhost\n');
  run('x509', '-req', '-in', 'server.csr', '-CA', 'ca.pem', '-CAkey', 'ca.key', '-CAcreateserial', '-out', 'server.pem', '-days', '1', '-extfile', 'san.ext');
  ca = join(dir, 'ca.pem');
  server = await startOwnNatsServer({
    extra: [`tls { cert_file: ${JSON.stringify(join(dir, 'server.pem'))}, key_file: ${JSON.stringify(join(dir, 'server.key'))} }`, 'authorization { user: bench_operator, password: "s3cret-test-only" }'],
  });
  if (server === null) console.log('nats-server is not installed: the NATS TLS test is skipped');
}, 30_000);
afterAll(async () => {
  await server?.stop();
});

const silent = { info: () => undefined, warn: () => undefined };

function worker(username: string | null, password: string | null, caFile: string | null): JetStreamWorker {
  const scale: ScaleConfig = { servers: [server?.url ?? ''], partitions: 1, stream: 'TLS', subjectPrefix: 'tls', replicas: 1, worker: 'bay-1', leaseSeconds: 2, leaseBucket: 'TLS_leases', checkpointBucket: 'TLS_checkpoints', checkpointSamples: 1000, fetchBatch: 16 };
  return new JetStreamWorker({ scale, broker: { username, password, tls: caFile === null ? null : { caFile, certFile: null, keyFile: null, rejectUnauthorized: true } }, subscriptions: [], log: silent, startAfter: () => 0 });
}

describe('a worker connects with credentials over TLS', () => {
  it('with the CA and the password it declares the stream; without either it gets one clear line', async (context) => {
    if (server === null) return context.skip();
    const good = worker('bench_operator', 's3cret-test-only', ca);
    await good.open();
    await good.link.close();
    const noPassword = await worker(null, null, ca).open().then(() => null, (e: unknown) => e as Error & { code: string });
    expect(noPassword?.code).toBe('ERR_SCALE_UNREACHABLE');
    expect(noPassword?.message).toMatch(/^cannot connect to the NATS server at nats:\/\/127\.0\.0\.1:\d+ \(.*(auth|Authorization).*\)$/i);
    const noCa = await worker('bench_operator', 's3cret-test-only', null).open().then(() => null, (e: unknown) => e as Error & { code: string });
    expect(noCa?.code).toBe('ERR_SCALE_UNREACHABLE');
    expect(noCa?.message.split('\n')).toHaveLength(1);
  });
});
