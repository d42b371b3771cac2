import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { FastifyInstance } from 'fastify';
import { buildHttpApp } from '../../src/server/http-app.js';
import { makeTestDaemon, type TestDaemon } from './harness.js';

// A channel's Type B components set through the API (issue 10): validated as the configuration's
// `typeB` list, one line per problem naming its key path; in force from the next sample, in the
// channel's budget and in the test points' windows over it. The rig is the invented bench HX-7.
// The certificate's u = U / k = 0.02 / 2 is GUM 4.3.3's rule for a stated multiple of u.

let t: TestDaemon;
let app: FastifyInstance;
const CHANNEL = 'hx7.glycol_in_degC';
const CERTIFICATE = { name: 'probe certificate', kind: 'certificate', expanded: 0.02, coverageFactor: 2 };

beforeAll(async () => {
  t = await makeTestDaemon();
  t.feedRig(20);
  app = buildHttpApp(t.daemon, { token: null, maxBodyBytes: 65536 });
});

afterAll(async () => {
  await app.close();
  await t.close();
});

const budgetOf = async () => {
  const r = await app.inject({ method: 'GET', url: `/api/channels/${CHANNEL}?trace=0` });
  return (r.json() as { combined: { budget: { component: string; evaluation: string; standardUncertainty: number }[] } | null }).combined?.budget ?? [];
};

describe("a channel's Type B components through the API", () => {
  it('a valid list replaces the configured one, is in the channel budget and in a running test point window, and is read back', async () => {
    t.daemon.startTestPoint({ id: 'tb-1', channels: [CHANNEL] });
    t.feedRig(5);
    const put = await app.inject({ method: 'PUT', url: `/api/channels/${CHANNEL}/type-b`, payload: { typeB: [CERTIFICATE] } });
    expect(put.statusCode).toBe(200);
    expect(put.json()).toMatchObject({ channel: CHANNEL, typeB: [{ name: 'probe certificate', kind: 'certificate' }] });
    expect((await app.inject({ method: 'GET', url: `/api/channels/${CHANNEL}/type-b` })).json()).toEqual(put.json());
    const line = (await budgetOf()).find((b) => b.component === 'probe certificate');
    expect(line?.evaluation).toBe('B');
    expect(line?.standardUncertainty).toBeCloseTo(0.01, 12);
    t.feedRig(2);
    t.daemon.stopTestPoint('tb-1');
    const record = t.daemon.store.records('tb-1').at(-1)?.body as { entries: { combined: { budget: { component: string }[] } | null }[] };
    expect(record.entries[0]?.combined?.budget.map((b) => b.component)).toContain('probe certificate');
    // The change is an event of the channel.
    expect(t.daemon.store.eventsFor(CHANNEL, 50).some((e) => e.kind === 'type-b-changed')).toBe(true);
  });

  it('a list with problems is refused whole: one line per problem naming its key path, and nothing changes', async () => {
    const before = await budgetOf();
    const r = await app.inject({ method: 'PUT', url: `/api/channels/${CHANNEL}/type-b`, payload: { typeB: [{ kind: 'certificate', expanded: -1, coverageFactor: 2 }, { name: 'x', kind: 'wobble' }, { name: 'half', kind: 'rectangular' }] } });
    expect(r.statusCode).toBe(400);
    const body = r.json() as { error: string; message: string };
    expect(body.error).toBe('ERR_TYPE_B_INVALID');
    const lines = body.message.split('\n');
    expect(lines).toEqual(
      expect.arrayContaining([
        expect.stringMatching(/^typeB\[0\]\.name: /),
        expect.stringMatching(/^typeB\[0\]\.expanded: /),
        expect.stringMatching(/^typeB\[1\]\.kind: unknown kind "wobble"/),
        expect.stringMatching(/^typeB\[2\]\.halfWidth: /),
      ]),
    );
    for (const line of lines) expect(line).toMatch(/^typeB\[\d\]\.\w+: /);
    expect(await budgetOf()).toEqual(before);
    const notAList = await app.inject({ method: 'PUT', url: `/api/channels/${CHANNEL}/type-b`, payload: { typeB: 'certificate' } });
    expect(notAList.statusCode).toBe(400);
    expect((notAList.json() as { message: string }).message).toMatch(/^typeB: /);
  });

  it('an unknown channel is a 404, a body without typeB a 400', async () => {
    expect((await app.inject({ method: 'PUT', url: '/api/channels/hx7.nowhere/type-b', payload: { typeB: [] } })).statusCode).toBe(404);
    expect((await app.inject({ method: 'GET', url: '/api/channels/hx7.nowhere/type-b' })).statusCode).toBe(404);
    expect((await app.inject({ method: 'PUT', url: `/api/channels/${CHANNEL}/type-b`, payload: { components: [] } })).statusCode).toBe(400);
    expect(t.daemon.registry.get('hx7.nowhere')).toBeUndefined();
  });
});
