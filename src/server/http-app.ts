import Fastify, { type FastifyInstance, type FastifyReply, type FastifyRequest } from 'fastify';
import { readFile } from 'node:fs/promises';
import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { dirname, join, normalize, sep } from 'node:path';
import type { Daemon } from '../daemon/daemon.js';
import { TestPointError } from '../engine/test-points.js';
import { recordCsv, type TestPointRecord } from '../engine/test-point-record.js';
import { renderReport } from './report.js';
import { openApiDocument } from './openapi.js';

/**
 * The HTTP API (fastify) and the static dashboard. Built apart from listening, so tests drive it
 * with `app.inject()`.
 *
 * Security: every write (test-point control, annotations) needs the configured token when one is
 * set, and the configuration requires one whenever the server listens beyond loopback. Requests
 * and bodies are size-limited; no CORS headers are sent (the browser's same-origin rule stands);
 * responses are JSON or static files, and the dashboard renders every text from the network as
 * text, never as HTML.
 */
export interface HttpAppOptions {
  token: string | null;
  maxBodyBytes: number;
  /** Where dashboard/ lives (defaults to the package's own). */
  dashboardDir?: string;
}

const root = join(dirname(fileURLToPath(import.meta.url)), '..', '..');

const CONTENT_TYPES: Record<string, string> = {
  '.html': 'text/html; charset=utf-8',
  '.js': 'text/javascript; charset=utf-8',
  '.css': 'text/css; charset=utf-8',
  '.svg': 'image/svg+xml',
  '.json': 'application/json; charset=utf-8',
  '.png': 'image/png',
};

export const NAME_PATTERN = '^[\\p{L}\\p{N}_.:\\-/]{1,128}$';

export function buildHttpApp(daemon: Daemon, options: HttpAppOptions): FastifyInstance {
  const app = Fastify({
    logger: false,
    bodyLimit: options.maxBodyBytes,
    ajv: { customOptions: { allErrors: false, coerceTypes: 'array', removeAdditional: false } },
  });
  const dashboardDir = options.dashboardDir ?? join(root, 'dashboard');

  app.setErrorHandler((error: Error & { statusCode?: number; code?: string; validation?: unknown }, _request, reply) => {
    if (error instanceof TestPointError) return reply.code(error.status).send({ error: error.code, message: error.message });
    if (error.validation) return reply.code(400).send({ error: 'ERR_REQUEST_INVALID', message: `request ${error.message}` });
    const status = error.statusCode && error.statusCode >= 400 && error.statusCode < 500 ? error.statusCode : 500;
    if (status === 500) daemon.log.error({ err: error.message }, 'http handler failed');
    return reply.code(status).send({ error: error.code ?? (status === 500 ? 'ERR_INTERNAL' : 'ERR_REQUEST'), message: status === 500 ? 'internal error (see the daemon log)' : error.message });
  });
  app.setNotFoundHandler((request, reply) => reply.code(404).send({ error: 'ERR_NOT_FOUND', message: `no route ${request.method} ${request.url.split('?')[0]}` }));

  const requireToken = async (request: FastifyRequest, reply: FastifyReply) => {
    if (options.token === null) return;
    const header = request.headers.authorization ?? '';
    const given = header.startsWith('Bearer ') ? header.slice(7) : (request.headers['x-plateau-token'] as string | undefined) ?? '';
    if (!timingSafeEqual(given, options.token)) {
      await reply.code(401).send({ error: 'ERR_TOKEN', message: 'this write needs the token from the configuration (Authorization: Bearer <token>)' });
    }
  };

  app.get('/healthz', async () => ({
    status: daemon.ingest?.connected ? 'ok' : 'degraded',
    broker: daemon.ingest?.connected ? 'connected' : 'disconnected',
    channels: daemon.registry.size,
  }));

  app.get('/api/counters', async () => daemon.counterReport());

  app.get('/api/openapi.json', async () => openApiDocument());

  app.get(
    '/api/channels',
    { schema: { querystring: { type: 'object', properties: { view: { type: 'string', enum: ['full', 'summary'] } }, additionalProperties: false } } },
    async (request) => {
      const view = (request.query as { view?: string }).view ?? 'full';
      const channels = daemon.registry.all().map((channel) => (view === 'summary' ? { ...channel.pipeline.summary(), unit: channel.unit } : { ...channel.pipeline.snapshot(), unit: channel.unit }));
      return { channels };
    },
  );

  app.get(
    '/api/channels/:name',
    {
      schema: {
        params: { type: 'object', properties: { name: { type: 'string', maxLength: 128 } }, required: ['name'] },
        querystring: { type: 'object', properties: { trace: { type: 'integer', minimum: 0, maximum: 20000 } }, additionalProperties: false },
      },
    },
    async (request, reply) => {
      const { name } = request.params as { name: string };
      const channel = daemon.registry.get(name);
      if (!channel) return reply.code(404).send({ error: 'ERR_CHANNEL_UNKNOWN', message: `no channel named "${name.slice(0, 80)}"` });
      const traceLength = (request.query as { trace?: number }).trace ?? 2000;
      const snapshot = channel.pipeline.snapshot();
      return {
        ...snapshot,
        unit: channel.unit,
        trace: channel.pipeline.recentTrace(traceLength),
        cusumTrace: channel.pipeline.cusumTrace(),
        storedEvents: daemon.store.eventsFor(name, 200),
      };
    },
  );

  app.get(
    '/api/events',
    { schema: { querystring: { type: 'object', properties: { after: { type: 'integer', minimum: 0 }, limit: { type: 'integer', minimum: 1, maximum: 1000 } }, additionalProperties: false } } },
    async (request) => {
      const { after = 0, limit = 200 } = request.query as { after?: number; limit?: number };
      return { events: daemon.events(after, limit) };
    },
  );

  app.get('/api/test-points', async () => ({
    testPoints: daemon.testPoints.list().map((point) => ({ ...point, verdict: daemon.testPoints.verdict(point) })),
  }));

  const testPointParams = { type: 'object', properties: { id: { type: 'string', maxLength: 64 } }, required: ['id'] } as const;

  app.post(
    '/api/test-points',
    {
      preHandler: requireToken,
      schema: {
        body: {
          type: 'object',
          properties: {
            id: { type: 'string', maxLength: 64 },
            name: { type: 'string', maxLength: 200 },
            channels: { type: 'array', items: { type: 'string', maxLength: 128 }, maxItems: 1000 },
            derived: { type: 'array', items: { type: 'string', maxLength: 128 }, maxItems: 100 },
          },
          required: ['channels'],
          additionalProperties: false,
        },
      },
    },
    async (request, reply) => {
      const body = request.body as { id?: string; name?: string; channels: string[]; derived?: string[] };
      const point = daemon.startTestPoint(body);
      return reply.code(201).send({ testPoint: { ...point, verdict: daemon.testPoints.verdict(point) } });
    },
  );

  app.get('/api/test-points/:id', { schema: { params: testPointParams } }, async (request, reply) => {
    const { id } = request.params as { id: string };
    const point = daemon.testPoints.get(id);
    if (!point) return reply.code(404).send({ error: 'ERR_TEST_POINT_UNKNOWN', message: `no test point ${id}` });
    return { testPoint: { ...point, verdict: daemon.testPoints.verdict(point) }, records: daemon.store.records(id) };
  });

  app.post('/api/test-points/:id/stop', { preHandler: requireToken, schema: { params: testPointParams } }, async (request) => {
    const { id } = request.params as { id: string };
    const point = daemon.stopTestPoint(id);
    return { testPoint: { ...point, verdict: daemon.testPoints.verdict(point) } };
  });

  app.post(
    '/api/test-points/:id/annotations',
    {
      preHandler: requireToken,
      schema: { params: testPointParams, body: { type: 'object', properties: { text: { type: 'string', minLength: 1, maxLength: 2000 } }, required: ['text'], additionalProperties: false } },
    },
    async (request, reply) => {
      const { id } = request.params as { id: string };
      const { text } = request.body as { text: string };
      const point = daemon.annotateTestPoint(id, text);
      return reply.code(201).send({ testPoint: point });
    },
  );

  app.get('/api/test-points/:id/records', { schema: { params: testPointParams } }, async (request, reply) => {
    const { id } = request.params as { id: string };
    if (!daemon.testPoints.get(id)) return reply.code(404).send({ error: 'ERR_TEST_POINT_UNKNOWN', message: `no test point ${id}` });
    return { records: daemon.store.records(id) };
  });

  const latestRecord = (id: string): TestPointRecord | null => {
    const records = daemon.store.records(id);
    return records.length > 0 ? ((records.at(-1) as { body: unknown }).body as TestPointRecord) : null;
  };

  app.get('/api/test-points/:id/record.csv', { schema: { params: testPointParams } }, async (request, reply) => {
    const { id } = request.params as { id: string };
    if (!daemon.testPoints.get(id)) return reply.code(404).send({ error: 'ERR_TEST_POINT_UNKNOWN', message: `no test point ${id}` });
    const record = latestRecord(id);
    if (!record) return reply.code(404).send({ error: 'ERR_RECORD_NONE', message: `test point ${id} has no record yet (one is written when it is ready or stopped)` });
    return reply.header('content-type', 'text/csv; charset=utf-8').header('content-disposition', `attachment; filename="${id}.csv"`).send(recordCsv(record));
  });

  app.get('/api/test-points/:id/record.json', { schema: { params: testPointParams } }, async (request, reply) => {
    const { id } = request.params as { id: string };
    if (!daemon.testPoints.get(id)) return reply.code(404).send({ error: 'ERR_TEST_POINT_UNKNOWN', message: `no test point ${id}` });
    const record = latestRecord(id);
    if (!record) return reply.code(404).send({ error: 'ERR_RECORD_NONE', message: `test point ${id} has no record yet (one is written when it is ready or stopped)` });
    return record;
  });

  app.get('/api/test-points/:id/report', { schema: { params: testPointParams } }, async (request, reply) => {
    const { id } = request.params as { id: string };
    const point = daemon.testPoints.get(id);
    if (!point) return reply.code(404).send({ error: 'ERR_TEST_POINT_UNKNOWN', message: `no test point ${id}` });
    const record = latestRecord(id);
    const channels = point.channels.map((name) => daemon.registry.get(name)).filter((c) => c !== undefined);
    const html = renderReport({ point, record, channels: channels.map((c) => ({ name: c.name, unit: c.unit, snapshot: c.pipeline.snapshot(), trace: c.pipeline.recentTrace(2000) })) });
    return reply.header('content-type', 'text/html; charset=utf-8').send(html);
  });

  // Static files: the dashboard and the chart library, from disk, never from a CDN.
  const vendor: Record<string, string> = {
    'uPlot.iife.min.js': join(root, 'node_modules', 'uplot', 'dist', 'uPlot.iife.min.js'),
    'uPlot.min.css': join(root, 'node_modules', 'uplot', 'dist', 'uPlot.min.css'),
  };
  app.get('/vendor/:file', async (request, reply) => {
    const { file } = request.params as { file: string };
    const path = vendor[file];
    if (!path || !existsSync(path)) return reply.code(404).send({ error: 'ERR_NOT_FOUND', message: `no vendor file ${file.slice(0, 80)}` });
    return sendFile(reply, path);
  });
  app.get('/', async (_request, reply) => sendFile(reply, join(dashboardDir, 'index.html')));
  app.get('/dashboard/*', async (request, reply) => {
    const relative = (request.params as { '*': string })['*'];
    const path = normalize(join(dashboardDir, relative));
    if (!path.startsWith(dashboardDir + sep) || !existsSync(path)) return reply.code(404).send({ error: 'ERR_NOT_FOUND', message: `no dashboard file ${relative.slice(0, 80)}` });
    return sendFile(reply, path);
  });
  return app;
}

async function sendFile(reply: FastifyReply, path: string): Promise<FastifyReply> {
  const extension = path.slice(path.lastIndexOf('.'));
  const body = await readFile(path);
  return reply
    .header('content-type', CONTENT_TYPES[extension] ?? 'application/octet-stream')
    .header('x-content-type-options', 'nosniff')
    .header('content-security-policy', "default-src 'self'; script-src 'self'; style-src 'self' 'unsafe-inline'; img-src 'self' data:; connect-src 'self'; frame-ancestors 'none'")
    .send(body);
}

function timingSafeEqual(a: string, b: string): boolean {
  if (a.length !== b.length) return false;
  let difference = 0;
  for (let i = 0; i < a.length; i++) difference |= a.charCodeAt(i) ^ b.charCodeAt(i);
  return difference === 0;
}
