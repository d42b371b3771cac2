import { describe, expect, it } from 'vitest';
import { parseConfig } from '../../src/config/load-config.js';

// The first line of the write protection: the configuration refuses to listen beyond loopback
// without a token, so every write there needs one (the HTTP app then checks it on each write).

const base = { subscriptions: [{ topic: 'rig/+', format: 'number', channel: '{2}' }] };

function problem(http: Record<string, unknown>): string | null {
  try {
    parseConfig({ ...base, http });
    return null;
  } catch (error) {
    return (error as Error).message;
  }
}

describe('http.listen and http.token', () => {
  it('loopback needs no token; 127.0.0.1 is the default', () => {
    expect(problem({})).toBeNull();
    expect(parseConfig(base).http).toMatchObject({ host: '127.0.0.1', token: null });
    expect(problem({ listen: '127.0.0.1:8080' })).toBeNull();
    expect(problem({ listen: '[::1]:8080' })).toBeNull();
  });

  it('beyond loopback without a token is refused, naming the key', () => {
    for (const listen of ['0.0.0.0:8080', '192.168.10.5:8080', '[::]:8080']) {
      const message = problem({ listen });
      expect(message, listen).toMatch(/http\.token/);
      expect(message, listen).toMatch(/beyond loopback/);
    }
  });

  it('beyond loopback with a token of 16 characters or more is accepted; a short token is refused', () => {
    expect(problem({ listen: '0.0.0.0:8080', token: 'rig-floor-token-2026' })).toBeNull();
    expect(problem({ listen: '0.0.0.0:8080', token: 'short' })).toMatch(/at least 16 characters/);
  });
});
