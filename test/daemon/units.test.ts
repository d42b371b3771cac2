import { afterEach, describe, expect, it } from 'vitest';
import pino from 'pino';
import { Daemon, daemonSubscriptions } from '../../src/daemon/daemon.js';
import { MemorySampleSource } from '../../src/ingest/memory-sample-source.js';
import { MemoryStore } from '../../src/store/memory-store.js';
import { ManualClock } from '../../src/clock/manual-clock.js';
import { testConfig } from '../helpers/daemon-config.js';
import { sameUnit, unitLabel, UNIT_LABELS } from '../../src/engine/unit-label.js';
import { pathToFileURL } from 'node:url';
import { join } from 'node:path';
import { ROOT } from '../helpers/reference.js';

// A configured unit wins over a payload's (a SenML base unit); a payload naming another unit is
// noted on the channel. Units are shown as people write them (SenML codes: RFC 8428, 12.1;
// printed symbols: the SI Brochure, 9th edition).

const open: Daemon[] = [];
afterEach(async () => {
  for (const daemon of open.splice(0)) await daemon.stop().catch(() => undefined);
});

async function rig() {
  const config = testConfig({
    url: 'mqtt://127.0.0.1:9',
    prefix: 'rig',
    clientId: 'units-test',
    channels: { defaults: { window: { kind: 'growing' } }, groups: [{ match: 'bath.*', unit: 'degC' }] },
    extra: { subscriptions: [{ topic: 'rig/senml', format: 'senml', channel: '{name}' }] },
  });
  const source = new MemorySampleSource(daemonSubscriptions(config));
  const daemon = new Daemon(config, { clock: new ManualClock(1_790_000_000_000), source, store: new MemoryStore(), logger: pino({ level: 'silent' }) });
  await daemon.start();
  open.push(daemon);
  return { daemon, source };
}

describe('channel units', () => {
  it('a SenML base unit "Cel" beside a configured "degC": the configured one, no conflict (the same unit)', async () => {
    const { daemon, source } = await rig();
    source.publish('rig/senml', JSON.stringify([{ bn: 'bath.', bu: 'Cel', bt: 1_790_000_000, n: 'ref', v: 20.01 }, { n: 'ref', t: 1, v: 20.02 }]));
    daemon.commitNow();
    const channel = daemon.channel('bath.ref');
    expect(channel?.unit).toBe('degC');
    expect(channel?.unitNote).toBeNull();
  });

  it('a SenML unit that is another unit ("K"): the configured one is kept, and the conflict noted', async () => {
    const { daemon, source } = await rig();
    source.publish('rig/senml', JSON.stringify([{ bn: 'bath.', bu: 'K', bt: 1_790_000_000, n: 'p1', v: 293.16 }]));
    daemon.commitNow();
    const channel = daemon.channel('bath.p1');
    expect(channel?.unit).toBe('degC');
    expect(channel?.unitNote).toBe('the payload gives the unit "K", the configuration "degC": the configuration\'s is used');
  });

  it('without a configured unit, the payload\'s', async () => {
    const { daemon, source } = await rig();
    source.publish('rig/senml', JSON.stringify([{ bn: 'line.', bu: 'Pa', bt: 1_790_000_000, n: 'p', v: 101_325 }]));
    daemon.commitNow();
    expect(daemon.channel('line.p')?.unit).toBe('Pa');
    expect(daemon.channel('line.p')?.unitNote).toBeNull();
  });

  it('printed forms: °C for Cel and degC, exponents raised, unknown codes as given', () => {
    expect(unitLabel('Cel')).toBe('°C');
    expect(unitLabel('degC')).toBe('°C');
    expect(unitLabel('m3/s')).toBe('m³/s');
    expect(unitLabel('m/s2')).toBe('m/s²');
    expect(unitLabel('Ohm')).toBe('Ω');
    expect(unitLabel('kg/s')).toBe('kg/s');
    expect(unitLabel('kPa')).toBe('kPa');
    expect(unitLabel('cm2')).toBe('cm²');
    expect(unitLabel(null)).toBe('');
    expect(sameUnit('Cel', 'degC')).toBe(true);
    expect(sameUnit('K', 'degC')).toBe(false);
  });

  it('the dashboard prints units with the same table and rule', async () => {
    const page = (await import(pathToFileURL(join(ROOT, 'dashboard', 'lib', 'format.js')).href)) as { UNIT_LABELS: Record<string, string>; unitText: (u: string | null) => string };
    expect(page.UNIT_LABELS).toEqual(UNIT_LABELS);
    for (const code of ['Cel', 'degC', 'm3/s', 'cm2', 'kg/s', 'x-2', '<b>2</b>']) expect(page.unitText(code)).toBe(unitLabel(code));
    expect(page.unitText(null)).toBe('');
  });

  it('the dashboard\'s event texts carry the unit of their source', async () => {
    const page = (await import(pathToFileURL(join(ROOT, 'dashboard', 'lib', 'format.js')).href)) as { describeEvent: (e: unknown, unit?: string | null) => { detail: string } };
    const reached = { kind: 'precision-reached', source: 'bath.ref', body: { expandedUncertainty: 0.005, bound: 0.01 } };
    expect(page.describeEvent(reached, 'degC').detail).toBe('U = 0.005 °C within 0.01 °C');
    expect(page.describeEvent({ ...reached, body: { ...reached.body, derived: true, value: 12.5, unit: 'kW' } }).detail).toBe('12.5 kW, U = 0.005 kW within 0.01 kW');
  });
});
