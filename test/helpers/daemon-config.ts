import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { parseConfig } from '../../src/config/load-config.js';
import type { PlateauConfig } from '../../src/config/plateau-config.js';

/** A daemon configuration for tests: JSON samples {v, t} on <prefix>/<channel>, a temporary SQLite file. */
export function testConfig(options: { url: string; prefix: string; clientId: string; store?: string; extra?: Record<string, unknown>; channels?: Record<string, unknown> }): PlateauConfig {
  const store = options.store ?? join(mkdtempSync(join(tmpdir(), 'plateau-it-')), 'state.sqlite');
  return parseConfig(
    {
      broker: { url: options.url, clientId: options.clientId, qos: 1, reconnectPeriodMs: 200 },
      subscriptions: [{ topic: `${options.prefix}/+`, format: 'json', channel: '{2}', valueField: 'v', timeField: 't', timeUnit: 's' }],
      channels: options.channels ?? { defaults: { window: { kind: 'growing' } } },
      store: { path: store },
      http: { listen: '127.0.0.1:0' },
      topics: { events: `${options.prefix}-plateau/events`, status: `${options.prefix}-plateau/status`, command: `${options.prefix}-plateau/command` },
      log: { level: 'silent' },
      ...(options.extra ?? {}),
    },
    'test',
  );
}
