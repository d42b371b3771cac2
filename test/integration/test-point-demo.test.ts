import { describe, expect, it } from 'vitest';
import WebSocket from 'ws';
import { startDemo } from '../../src/cli/demo.js';
import { mqttClient, unique, waitFor } from '../helpers/brokers.js';

// A test point driven from start to ready by the simulated rig (bench HX-7, 50 times faster than
// real time), its record exported, and its alert seen on the WebSocket and on the MQTT event topic,
// with the retained status a rig sequencer would wait on.

describe('a test point on the simulated rig', () => {
  it('starts, becomes ready, writes its record, and announces it on WebSocket and MQTT', async () => {
    const demo = await startDemo({ speed: 50, brokerPort: 0, httpPort: 0, logLevel: 'silent' });
    try {
      const base = demo.server.url;
      const topics = demo.daemon.config.topics;
      const sequencer = await mqttClient(demo.broker.url, unique('sequencer'));
      const mqttEvents: { kind: string; source: string }[] = [];
      const statuses = new Map<string, { state: string }>();
      sequencer.on('message', (topic, payload) => {
        const body = JSON.parse(payload.toString()) as { kind: string; source: string; state: string };
        if (topic.startsWith(`${topics.events}/`)) mqttEvents.push(body);
        else statuses.set(topic, body);
      });
      await new Promise<void>((resolve) => sequencer.subscribe([`${topics.events}/#`, `${topics.status}/#`], { qos: 1 }, () => resolve()));
      const socket = new WebSocket(`${base.replace('http', 'ws')}ws`);
      const wsEvents: { kind: string; source: string }[] = [];
      socket.on('message', (data) => {
        const message = JSON.parse(data.toString()) as { type: string; event?: { kind: string; source: string } };
        if (message.type === 'event' && message.event) wsEvents.push(message.event);
      });
      await new Promise((resolve) => socket.once('open', resolve));
      // Let the flows arrive first, then start the test point over them.
      await waitFor(() => (demo.daemon.registry.get('hx7.glycol_flow_kg_s')?.pipeline.totalReceived ?? 0) > 200, 20_000, 'the rig to publish');
      const created = await fetch(`${base}api/test-points`, {
        method: 'POST',
        headers: { 'content-type': 'application/json' },
        body: JSON.stringify({ id: 'hx7-sp1', name: 'HX-7 set point 1', channels: ['hx7.glycol_flow_kg_s', 'hx7.water_flow_kg_s'] }),
      });
      expect(created.status).toBe(201);
      await waitFor(() => wsEvents.some((e) => e.kind === 'test-point-ready' && e.source === 'hx7-sp1'), 60_000, 'the test point to become ready (WebSocket)');
      await waitFor(() => mqttEvents.some((e) => e.kind === 'test-point-ready' && e.source === 'hx7-sp1'), 10_000, 'the ready event on MQTT');
      await waitFor(() => statuses.get(`${topics.status}/test-point/hx7-sp1`)?.state === 'ready', 10_000, 'the retained test-point status');
      // The record: JSON and CSV, the same numbers.
      const record = (await (await fetch(`${base}api/test-points/hx7-sp1/record.json`)).json()) as { kind: string; entries: { channel: string; mean: number; expandedUncertainty: number; statement: string }[]; caution: string };
      expect(record.kind).toBe('ready');
      expect(record.entries.map((e) => e.channel)).toEqual(['hx7.glycol_flow_kg_s', 'hx7.water_flow_kg_s']);
      expect(record.caution).toMatch(/not a safety system/);
      for (const entry of record.entries) expect(entry.statement).toMatch(/expanded uncertainty U = k·u/);
      const csv = await (await fetch(`${base}api/test-points/hx7-sp1/record.csv`)).text();
      const [header, ...rows] = csv.trim().split('\r\n');
      const columns = (header as string).split(',');
      const meanColumn = columns.indexOf('mean');
      const uColumn = columns.indexOf('expandedUncertainty');
      rows.forEach((row, i) => {
        const cells = row.split(',');
        expect(Number(cells[meanColumn])).toBe(record.entries[i]?.mean);
        expect(Number(cells[uColumn])).toBe(record.entries[i]?.expandedUncertainty);
      });
      // A retained status arrives for a sequencer that subscribes later, too.
      const late = await mqttClient(demo.broker.url, unique('late-sequencer'));
      const retained = await new Promise<{ state: string }>((resolve) => {
        late.on('message', (_topic, payload) => resolve(JSON.parse(payload.toString()) as { state: string }));
        late.subscribe(`${topics.status}/test-point/hx7-sp1`, { qos: 1 });
      });
      expect(retained.state).toBe('ready');
      late.end(true);
      socket.close();
      sequencer.end(true);
    } finally {
      await demo.stop();
    }
  }, 120_000);
});
