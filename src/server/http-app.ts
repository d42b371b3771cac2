import { unitLabel } from '../engine/unit-label.js';
import Fastify, { type FastifyInstance, type FastifyReply, type FastifyRequest, type RouteOptions } from 'fastify';
import { existsSync, readFileSync, realpathSync, statSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { dirname, join, normalize, sep } from 'node:path';
import pino, { type Logger } from 'pino';
import type { DaemonApi } from '../ports/daemon-api.js';
import { PlateauError, type ErrorCode, type ErrorDetails } from '../errors/catalogue.js';
import { recordCsv, RECORD_CAUTION, type TestPointRecord } from '../engine/test-point-record.js';
import { renderReport, reportTrace } from './report.js';
import { openApiDocument, type DocumentedRoute } from './openapi.js';
import { recordDerivedEntries } from './record-derived.js';
import { recordsCsv } from './records-csv.js';
import { derivedRecordCsv } from '../engine/derived/derived-record.js';
import { sameOrigin } from './origin.js';
import {
  acknowledgement,
  channelSnapshot,
  channelIntake,
  channelSummary,
  channelTraceSchema,
  derivedResult,
  errorReply,
  recordRow,
  storedEvent,
  testPoint as testPointSchema,
  testPointRecord,
  NAME_PATTERN,
  TEST_POINT_ID_PATTERN,
} from './api-schemas.js';
import { WS_LIMITS } from './ws-hub.js';

export { NAME_PATTERN } from './api-schemas.js';

declare module 'fastify' {
  /** Documentation keys copied into the OpenAPI description (fastify itself ignores them). */
  interface FastifySchema {
    summary?: string;
    description?: string;
    security?: Record<string, string[]>[];
  }
}

/**
 * The HTTP API (fastify) and the static dashboard. Built apart from listening, so tests drive it
 * with `app.inject()`.
 *
 * Errors: every failure is `{ error: CODE, message: one line }` with a 4xx status when the request
 * is at fault (validation 400, token 401, cross-site write 403, unknown thing 404, conflict 409,
 * body too large 413, URL too long 414, not JSON 415); a 500 only for a fault of the daemon, logged.
 *
 * Security: every write (test-point control, annotations, alert acknowledgement) needs the
 * configured token when one is set, and the configuration requires one whenever the server listens
 * beyond loopback. The token is checked before the body is read. A write whose Origin header names
 * another site is refused (a page elsewhere cannot drive the rig through a browser on the rig's
 * network). Bodies are size-limited (http.maxBodyBytes), path parameters are length-limited; no CORS
 * headers are sent, so the browser's same-origin rule stands. Pages are served with a content
 * security policy that allows only the daemon's own scripts; the dashboard and the report render
 * every text from the network as text, never as HTML.
 */
export interface HttpAppOptions {
  token: string | null;
  maxBodyBytes: number;
  /** Where a handler's fault (a 500) is logged, with its stack (default: errors to standard output). */
  log?: Logger;
  /** Where dashboard/ lives (defaults to the package's own). */
  dashboardDir?: string;
  /** What the samples' time stamps are, when they are not the rig's real time (the demo: "simulated time, 20x real time"). */
  sampleClock?: string;
}

const root = join(dirname(fileURLToPath(import.meta.url)), '..', '..');
const VERSION = readVersion();

const CONTENT_TYPES: Record<string, string> = {
  '.html': 'text/html; charset=utf-8',
  '.js': 'text/javascript; charset=utf-8',
  '.css': 'text/css; charset=utf-8',
  '.svg': 'image/svg+xml',
  '.json': 'application/json; charset=utf-8',
  '.png': 'image/png',
  '.ico': 'image/x-icon',
};

const PAGE_POLICY = "default-src 'self'; script-src 'self'; style-src 'self' 'unsafe-inline'; img-src 'self' data:; connect-src 'self'; object-src 'none'; base-uri 'none'; form-action 'self'; frame-ancestors 'none'";
/** The report has no script at all. */
const REPORT_POLICY = "default-src 'none'; style-src 'unsafe-inline'; img-src data:; base-uri 'none'; form-action 'none'; frame-ancestors 'none'";

/** Longest path parameter accepted (a channel name of 128 characters, percent-encoded). */
const MAX_PARAM_LENGTH = 1024;

const errors = (...codes: number[]) => Object.fromEntries(codes.map((code) => [code, errorReply]));

export function buildHttpApp(daemon: DaemonApi, options: HttpAppOptions): FastifyInstance {
  const log = options.log ?? pino({ level: 'error', base: { service: 'plateau' } });
  const routes: DocumentedRoute[] = [];
  const app = Fastify({
    logger: false,
    bodyLimit: options.maxBodyBytes,
    routerOptions: { maxParamLength: MAX_PARAM_LENGTH },
    return503OnClosing: true,
    ajv: { customOptions: { allErrors: false, coerceTypes: 'array', removeAdditional: false } },
    frameworkErrors: (error, _request, reply) => {
      const tooLong = (error as { code?: string }).code === 'FST_ERR_MAX_PARAM_LENGTH';
      void send(reply as FastifyReply, tooLong ? 'ERR_REQUEST_URL_TOO_LONG' : 'ERR_REQUEST_URL', { max: MAX_PARAM_LENGTH });
    },
  });
  const dashboardDir = options.dashboardDir ?? join(root, 'dashboard');
  // Bodies are JSON only (a plain-text body is a 415, not a string that fails validation).
  app.removeContentTypeParser('text/plain');
  app.addHook('onRoute', (route: RouteOptions) => {
    const methods = Array.isArray(route.method) ? route.method : [route.method];
    for (const method of methods) routes.push({ method: String(method), url: route.url, schema: (route.schema ?? {}) as Record<string, unknown> });
  });

  app.setErrorHandler((error: Error & { statusCode?: number; code?: string; validation?: unknown; validationContext?: string }, request, reply) => {
    if (error instanceof PlateauError && error.status !== 500) return reply.code(error.status).send({ error: error.code, message: error.message });
    if (error.validation) return send(reply, 'ERR_REQUEST_INVALID', { detail: error.message });
    const framework = FRAMEWORK_ERRORS[error.code ?? ''];
    if (framework) return send(reply, framework, { max: options.maxBodyBytes });
    if (error.statusCode && error.statusCode >= 400 && error.statusCode < 500) return reply.code(error.statusCode).send({ error: 'ERR_REQUEST', message: error.message });
    log.error({ err: error, url: request.url.slice(0, 200) }, 'http handler failed');
    return send(reply, 'ERR_INTERNAL');
  });
  app.setNotFoundHandler((request, reply) => send(reply, 'ERR_NOT_FOUND', { detail: `no route ${request.method} ${request.url.split('?')[0]?.slice(0, 200)}` }));

  app.addHook('onSend', async (request, reply, payload) => {
    reply.header('x-content-type-options', 'nosniff');
    reply.header('referrer-policy', 'no-referrer');
    reply.header('x-frame-options', 'DENY');
    if (request.url.startsWith('/api/') || request.url === '/healthz') reply.header('cache-control', 'no-store');
    return payload;
  });

  /** Writes: the token (when configured) and no cross-site Origin; checked before the body is read. */
  const requireWriteAccess = async (request: FastifyRequest, reply: FastifyReply) => {
    const origin = request.headers.origin;
    if (origin !== undefined && !sameOrigin(origin, request.headers.host)) {
      return send(reply, 'ERR_ORIGIN', { origin: origin.slice(0, 100) });
    }
    if (options.token === null) return;
    const header = request.headers.authorization ?? '';
    const given = header.startsWith('Bearer ') ? header.slice(7) : ((request.headers['x-plateau-token'] as string | undefined) ?? '');
    if (!timingSafeEqual(given, options.token)) {
      return send(reply, 'ERR_TOKEN', { detail: given === '' ? 'this write needs the token from the configuration (Authorization: Bearer <token>)' : 'the token does not match the configured one' });
    }
  };

  const testPointParams = { type: 'object', properties: { id: { type: 'string', pattern: TEST_POINT_ID_PATTERN } }, required: ['id'] } as const;
  const unknownTestPoint = (reply: FastifyReply, id: string) => send(reply, 'ERR_TEST_POINT_UNKNOWN', { id });

  const healthReply = {
    type: 'object',
    required: ['status', 'broker', 'store', 'channels'],
    properties: {
      status: { type: 'string', enum: ['ok', 'degraded', 'failing'] },
      broker: { type: 'string', enum: ['connected', 'disconnected'] },
      store: { type: 'string', enum: ['ok', 'failing'] },
      channels: { type: 'integer' },
      failingSinceMs: { type: 'number' },
      error: { type: 'object', properties: { code: { type: 'string' }, message: { type: 'string' } }, additionalProperties: false },
    },
    additionalProperties: false,
  } as const;
  app.get(
    '/healthz',
    {
      schema: {
        summary: 'liveness: 200 while commits succeed (status degraded while the broker is disconnected), 503 while commits to the store fail (nothing is acknowledged then)',
        response: { 200: healthReply, 503: healthReply },
      },
    },
    async (_request, reply) => {
      const health = daemon.health();
      const body = {
        status: health.status,
        broker: health.broker,
        store: health.store.failing ? 'failing' : 'ok',
        channels: daemon.channels().length,
        ...(health.store.since !== null ? { failingSinceMs: health.store.since } : {}),
        ...(health.store.lastError !== null ? { error: health.store.lastError } : {}),
      };
      return reply.code(health.store.failing ? 503 : 200).send(body);
    },
  );

  app.get(
    '/api/server',
    {
      schema: {
        summary: 'what a client needs to know: version, whether writes need the token, limits, derived results, alert kinds, the caution',
        response: {
          200: {
            type: 'object',
            properties: {
              name: { type: 'string' },
              version: { type: 'string' },
              serverTimeMs: { type: 'number' },
              writesNeedToken: { type: 'boolean' },
              limits: { type: 'object', additionalProperties: { type: 'number' } },
              derived: { type: 'array', items: { type: 'string' } },
              alertKinds: { type: 'array', items: { type: 'string' } },
              lastEventId: { type: 'integer' },
              caution: { type: 'string' },
              sampleClock: { type: 'string' },
            },
            additionalProperties: false,
          },
        },
      },
    },
    async () => ({
      name: 'plateau',
      version: VERSION,
      serverTimeMs: Date.now(),
      writesNeedToken: options.token !== null,
      limits: { maxBodyBytes: options.maxBodyBytes, maxWebSocketMessageBytes: WS_LIMITS.maxPayloadBytes, channelUpdateIntervalMs: WS_LIMITS.updateIntervalMs, maxTraceSamples: 20_000 },
      derived: daemon.derivedNames(),
      alertKinds: [...daemon.alertKinds()],
      lastEventId: daemon.lastEventId,
      caution: RECORD_CAUTION,
      ...(options.sampleClock !== undefined ? { sampleClock: options.sampleClock } : {}),
    }),
  );

  app.get('/api/counters', { schema: { summary: 'samples accepted and rejected by reason, broker, ingest lag, flushes, database size, memory', response: { 200: { type: 'object', additionalProperties: true } } } }, async () => daemon.counterReport());

  app.get('/api/openapi.json', { schema: { summary: 'this document (OpenAPI 3.0)', response: { 200: { type: 'object', additionalProperties: true } } } }, async () => openApiDocument(routes, VERSION));

  app.get(
    '/api/channels',
    {
      schema: {
        summary: 'every channel: the snapshot of `plateau analyze --json` (view=full, the default) or the live summary (view=summary)',
        querystring: { type: 'object', properties: { view: { type: 'string', enum: ['full', 'summary'] } }, additionalProperties: false },
        response: { 200: { type: 'object', required: ['channels'], properties: { channels: { type: 'array', items: { anyOf: [channelSnapshot, channelSummary] } } }, additionalProperties: false }, 400: errorReply },
      },
    },
    async (request) => {
      const view = (request.query as { view?: string }).view ?? 'full';
      const channels = daemon.channels().map((channel) => (view === 'summary' ? { ...channel.summary(), ...unitFields(channel) } : { ...channel.snapshot(), ...unitFields(channel) }));
      return { channels };
    },
  );

  const typeBParams = { type: 'object', properties: { name: { type: 'string', pattern: NAME_PATTERN } }, required: ['name'] } as const;
  const typeBReply = { type: 'object', required: ['channel', 'typeB'], properties: { channel: { type: 'string' }, typeB: { type: 'array', items: { type: 'object', additionalProperties: true } } }, additionalProperties: false } as const;
  app.get(
    '/api/channels/:name/type-b',
    { schema: { summary: "a channel's Type B components in force (from the configuration, or as last set through the API)", params: typeBParams, response: { 200: typeBReply, ...errors(400, 404) } } },
    async (request, reply) => {
      const { name } = request.params as { name: string };
      const found = daemon.channelTypeB(name);
      if (!found) return send(reply, 'ERR_CHANNEL_UNKNOWN', { name: name.slice(0, 80) });
      return found;
    },
  );

  app.put(
    '/api/channels/:name/type-b',
    {
      onRequest: requireWriteAccess,
      schema: {
        summary: "replace a channel's Type B components (the configuration's `typeB` list): from its next sample, stored, kept across restarts",
        description: 'The body is `{"typeB": [...]}`, each component as under `channels.*.typeB` in the configuration. A list with problems is refused whole (ERR_TYPE_B_INVALID, 400) with one line per problem naming its key path (`typeB[0].U`); records already written keep the budget they were written with.',
        security: [{ token: [] }],
        params: typeBParams,
        body: { type: 'object', properties: { typeB: {} }, required: ['typeB'], additionalProperties: false },
        response: { 200: typeBReply, ...errors(400, 401, 403, 404, 413, 415) },
      },
    },
    async (request) => {
      const { name } = request.params as { name: string };
      const { typeB } = request.body as { typeB: unknown };
      return daemon.setChannelTypeB(name, typeB);
    },
  );

  app.get(
    '/api/channels/:name',
    {
      schema: {
        summary: 'one channel: snapshot (with ACF, Allan deviation, stationarity tests, recent events), recent trace with the warm-up cut and gaps, CUSUM trace, stored events, its intake (refused samples by reason, gaps)',
        description: 'Names may contain "/": percent-encode them (%2F). `trace` is how many recent samples to return (default 2000); when the window holds fewer, the samples before it (warm-up, or before the test point) are added from the store.',
        params: { type: 'object', properties: { name: { type: 'string', pattern: NAME_PATTERN } }, required: ['name'] },
        querystring: { type: 'object', properties: { trace: { type: 'integer', minimum: 0, maximum: 20000 }, events: { type: 'integer', minimum: 0, maximum: 1000 } }, additionalProperties: false },
        response: {
          200: {
            type: 'object',
            properties: {
              ...channelSnapshot.properties,
              trace: channelTraceSchema,
              cusumTrace: { type: ['object', 'null'], additionalProperties: true },
              storedEvents: { type: 'array', items: storedEvent },
              intake: channelIntake,
            },
            additionalProperties: true,
          },
          ...errors(400, 404),
        },
      },
    },
    async (request, reply) => {
      const { name } = request.params as { name: string };
      const channel = daemon.channel(name);
      if (!channel) return send(reply, 'ERR_CHANNEL_UNKNOWN', { name: name.slice(0, 80) });
      const query = request.query as { trace?: number; events?: number };
      const snapshot = channel.snapshot();
      return {
        ...snapshot,
        ...unitFields(channel),
        trace: channel.trace(query.trace ?? 2000),
        cusumTrace: channel.cusumTrace(),
        storedEvents: channel.storedEvents(query.events ?? 200),
        ...(channel.intake !== undefined ? { intake: channel.intake() } : {}),
      };
    },
  );

  app.get(
    '/api/derived',
    {
      schema: {
        summary: 'every derived result: value, u, dof, k, U, budget, covariance terms, target and the state of its inputs (the `derived` entries of `plateau analyze --json` without the record-only checks)',
        querystring: { type: 'object', properties: {}, additionalProperties: false },
        response: { 200: { type: 'object', required: ['derived'], properties: { derived: { type: 'array', items: derivedResult } }, additionalProperties: false }, ...errors(400) },
      },
    },
    async () => ({ derived: daemon.derivedResults() }),
  );

  app.get(
    '/api/derived/:name',
    {
      schema: {
        summary: 'one derived result with its uncertainty budget and its stored events',
        description: '`events` is how many of its latest stored events to return (default 200), oldest first.',
        params: { type: 'object', properties: { name: { type: 'string', pattern: NAME_PATTERN } }, required: ['name'] },
        querystring: { type: 'object', properties: { events: { type: 'integer', minimum: 0, maximum: 1000 } }, additionalProperties: false },
        response: { 200: { ...derivedResult, properties: { ...derivedResult.properties, storedEvents: { type: 'array', items: storedEvent } } }, ...errors(400, 404) },
      },
    },
    async (request, reply) => {
      const { name } = request.params as { name: string };
      const view = daemon.derivedResult(name);
      if (!view) return send(reply, 'ERR_DERIVED_UNKNOWN', { name: name.slice(0, 80), known: daemon.derivedNames().join(', ') || 'none' });
      const events = (request.query as { events?: number }).events ?? 200;
      return { ...view, storedEvents: daemon.eventsFor(name, events) };
    },
  );

  app.get(
    '/api/events',
    {
      schema: {
        summary: 'stored events, oldest first: those after an id (after, limit), or the newest ones (latest)',
        querystring: {
          type: 'object',
          properties: { after: { type: 'integer', minimum: 0 }, limit: { type: 'integer', minimum: 1, maximum: 1000 }, latest: { type: 'integer', minimum: 1, maximum: 1000 } },
          additionalProperties: false,
        },
        response: {
          200: {
            type: 'object',
            properties: { events: { type: 'array', items: storedEvent }, lastEventId: { type: 'integer' }, acknowledgements: { type: 'array', items: acknowledgement } },
            additionalProperties: false,
          },
          ...errors(400),
        },
      },
    },
    async (request, reply) => {
      const { after, limit, latest } = request.query as { after?: number; limit?: number; latest?: number };
      if (latest !== undefined && (after !== undefined || limit !== undefined)) return send(reply, 'ERR_REQUEST_INVALID', { detail: 'querystring: use either latest, or after and limit' });
      const list = latest !== undefined ? daemon.latestEvents(latest) : daemon.events(after ?? 0, limit ?? 200);
      const first = list[0]?.id ?? daemon.lastEventId;
      return { events: list, lastEventId: daemon.lastEventId, acknowledgements: daemon.acknowledgementsAfter(first - 1) };
    },
  );

  app.post(
    '/api/events/:id/acknowledge',
    {
      onRequest: requireWriteAccess,
      schema: {
        summary: 'acknowledge an alert (kept as an event of kind alert-acknowledged; acknowledging again returns the first acknowledgement)',
        security: [{ token: [] }],
        params: { type: 'object', properties: { id: { type: 'integer', minimum: 1 } }, required: ['id'] },
        body: { type: ['object', 'null'], properties: { note: { type: 'string', maxLength: 500 } }, additionalProperties: false },
        response: { 200: { type: 'object', properties: { acknowledgement, alreadyAcknowledged: { type: 'boolean' } }, additionalProperties: false }, ...errors(400, 401, 403, 404, 409, 413, 415) },
      },
    },
    async (request, reply) => {
      const { id } = request.params as { id: number };
      const note = (request.body as { note?: string } | null | undefined)?.note ?? null;
      const result = daemon.acknowledgeEvent(id, note);
      return { acknowledgement: result.acknowledgement, alreadyAcknowledged: result.already };
    },
  );

  app.get(
    '/api/test-points',
    { schema: { summary: 'test points with their verdicts, in order of creation', response: { 200: { type: 'object', properties: { testPoints: { type: 'array', items: testPointSchema } }, additionalProperties: false } } } },
    async () => ({ testPoints: daemon.testPointViews() }),
  );

  app.post(
    '/api/test-points',
    {
      onRequest: requireWriteAccess,
      schema: {
        summary: 'create and start a test point: its own window over each channel starts at the next sample (other test points keep theirs)',
        security: [{ token: [] }],
        body: {
          type: 'object',
          properties: {
            id: { type: 'string', pattern: TEST_POINT_ID_PATTERN },
            name: { type: 'string', minLength: 1, maxLength: 200 },
            channels: { type: 'array', items: { type: 'string', pattern: NAME_PATTERN }, maxItems: 1000 },
            derived: { type: 'array', items: { type: 'string', pattern: NAME_PATTERN }, maxItems: 100 },
            setPoints: { type: 'object', additionalProperties: { type: 'number' }, maxProperties: 1000 },
          },
          required: ['channels'],
          additionalProperties: false,
        },
        response: { 201: { type: 'object', properties: { testPoint: testPointSchema }, additionalProperties: false }, ...errors(400, 401, 403, 409, 413, 415) },
      },
    },
    async (request, reply) => {
      const body = request.body as { id?: string; name?: string; channels: string[]; derived?: string[]; setPoints?: Record<string, number> };
      return reply.code(201).send({ testPoint: daemon.startTestPoint(body) });
    },
  );

  app.get(
    '/api/test-points/:id',
    { schema: { summary: 'one test point and its records', params: testPointParams, response: { 200: { type: 'object', properties: { testPoint: testPointSchema, records: { type: 'array', items: recordRow } }, additionalProperties: false }, ...errors(400, 404) } } },
    async (request, reply) => {
      const { id } = request.params as { id: string };
      const point = daemon.testPoint(id);
      if (!point) return unknownTestPoint(reply, id);
      return { testPoint: point, records: daemon.records(id) };
    },
  );

  app.post(
    '/api/test-points/:id/stop',
    {
      onRequest: requireWriteAccess,
      schema: { summary: 'stop a test point (writes its final record)', security: [{ token: [] }], params: testPointParams, response: { 200: { type: 'object', properties: { testPoint: testPointSchema }, additionalProperties: false }, ...errors(400, 401, 403, 404, 409) } },
    },
    async (request) => {
      const { id } = request.params as { id: string };
      return { testPoint: daemon.stopTestPoint(id) };
    },
  );

  app.post(
    '/api/test-points/:id/annotations',
    {
      onRequest: requireWriteAccess,
      schema: {
        summary: 'add a note to a test point (any text; shown as text)',
        security: [{ token: [] }],
        params: testPointParams,
        body: { type: 'object', properties: { text: { type: 'string', minLength: 1, maxLength: 2000 } }, required: ['text'], additionalProperties: false },
        response: { 201: { type: 'object', properties: { testPoint: testPointSchema }, additionalProperties: false }, ...errors(400, 401, 403, 404, 409, 413, 415) },
      },
    },
    async (request, reply) => {
      const { id } = request.params as { id: string };
      const { text } = request.body as { text: string };
      if (text.trim() === '') return send(reply, 'ERR_REQUEST_INVALID', { detail: 'body/text is blank' });
      return reply.code(201).send({ testPoint: daemon.annotateTestPoint(id, text) });
    },
  );

  app.get(
    '/api/test-points/:id/records',
    { schema: { summary: 'every record of a test point, oldest first', params: testPointParams, response: { 200: { type: 'object', properties: { records: { type: 'array', items: recordRow } }, additionalProperties: false }, ...errors(400, 404) } } },
    async (request, reply) => {
      const { id } = request.params as { id: string };
      if (!daemon.testPoint(id)) return unknownTestPoint(reply, id);
      return { records: daemon.records(id) };
    },
  );

  /** Every test point with its records, in order of creation (records oldest first). */
  const allRecords = () => daemon.testPointViews().map((point) => ({ testPoint: { id: point.id, name: point.name, setPoints: point.setPoints ?? {}, state: point.state, createdMs: point.createdMs, channels: point.channels, derived: point.derived }, records: daemon.records(point.id) }));

  app.get(
    '/api/records',
    {
      schema: {
        summary: "every test point's records, test points in order of creation and each one's records oldest first (the records page)",
        response: {
          200: {
            type: 'object',
            required: ['testPoints', 'caution'],
            properties: {
              testPoints: {
                type: 'array',
                items: {
                  type: 'object',
                  required: ['testPoint', 'records'],
                  properties: { testPoint: { type: 'object', additionalProperties: true }, records: { type: 'array', items: recordRow } },
                  additionalProperties: false,
                },
              },
              caution: { type: 'string' },
            },
            additionalProperties: false,
          },
        },
      },
    },
    async () => ({ testPoints: allRecords(), caution: RECORD_CAUTION }),
  );

  app.get(
    '/api/records.csv',
    {
      schema: {
        summary: 'every record of every test point as one CSV (RFC 4180): one row per channel and per derived result of each record, with its test point, set points and record, the statement, provisional or not, and the caution in every row',
      },
    },
    async (_request, reply) => reply.header('content-type', 'text/csv; charset=utf-8').header('content-disposition', 'attachment; filename="plateau-records.csv"').send(recordsCsv(allRecords())),
  );

  const latestRecord = (id: string): TestPointRecord | null => {
    const records = daemon.records(id);
    return records.length > 0 ? ((records.at(-1) as { body: unknown }).body as TestPointRecord) : null;
  };
  const noRecord = (reply: FastifyReply, id: string) => send(reply, 'ERR_RECORD_NONE', { id });

  app.get(
    '/api/test-points/:id/record.csv',
    { schema: { summary: 'the latest record as CSV (RFC 4180), one row per channel', params: testPointParams, response: { ...errors(400, 404) } } },
    async (request, reply) => {
      const { id } = request.params as { id: string };
      if (!daemon.testPoint(id)) return unknownTestPoint(reply, id);
      const record = latestRecord(id);
      if (!record) return noRecord(reply, id);
      return reply.header('content-type', 'text/csv; charset=utf-8').header('content-disposition', `attachment; filename="${id}.csv"`).send(recordCsv(record));
    },
  );

  app.get(
    '/api/test-points/:id/record-derived.csv',
    {
      schema: {
        summary: "the latest record's derived results as CSV (RFC 4180), one row per derived result",
        description: 'A file of its own beside record.csv (one row per channel), so that each file is one table with one header: value, u, dof, k, U, the Monte Carlo interval and validation, whether the bootstrap agrees, the budget as channel:share pairs, the statement. 404 when the record holds no derived result.',
        params: testPointParams,
        response: { ...errors(400, 404) },
      },
    },
    async (request, reply) => {
      const { id } = request.params as { id: string };
      if (!daemon.testPoint(id)) return unknownTestPoint(reply, id);
      const record = latestRecord(id);
      if (!record) return noRecord(reply, id);
      const entries = recordDerivedEntries(record.derived);
      if (entries.length === 0) return send(reply, 'ERR_RECORD_NO_DERIVED', { id });
      return reply.header('content-type', 'text/csv; charset=utf-8').header('content-disposition', `attachment; filename="${id}-derived.csv"`).send(derivedRecordCsv(entries));
    },
  );

  app.get(
    '/api/test-points/:id/record.json',
    { schema: { summary: 'the latest record', params: testPointParams, response: { 200: testPointRecord, ...errors(400, 404) } } },
    async (request, reply) => {
      const { id } = request.params as { id: string };
      if (!daemon.testPoint(id)) return unknownTestPoint(reply, id);
      const record = latestRecord(id);
      if (!record) return noRecord(reply, id);
      return reply.header('content-disposition', `inline; filename="${id}.json"`).send(record);
    },
  );

  app.get(
    '/api/test-points/:id/report',
    { schema: { summary: 'printable report (HTML, print to PDF): results in GUM wording, evidence, charts, cautions', params: testPointParams, response: { ...errors(400, 404) } } },
    async (request, reply) => {
      const { id } = request.params as { id: string };
      const point = daemon.testPoint(id);
      if (!point) return unknownTestPoint(reply, id);
      const record = latestRecord(id);
      // The record's frozen evidence for each channel it holds; the test point's own window only where it holds none.
      const recorded = new Set((record?.entries ?? []).filter((e) => e.evidence).map((e) => e.channel));
      const live = point.channels.every((name) => recorded.has(name)) ? [] : daemon.testPointWindows(id, 4000).filter((w) => !recorded.has(w.name));
      const html = renderReport({
        point,
        record,
        generatedMs: Date.now(),
        version: VERSION,
        live: live.map((w) => ({ name: w.name, unit: w.unit, snapshot: w.snapshot, trace: reportTrace(w.trace), cusum: w.cusum })),
        derived: record === null && point.derived.length > 0 ? daemon.derivedResults().filter((d) => point.derived.includes(d.name)) : [],
      });
      return reply.header('content-type', 'text/html; charset=utf-8').header('content-security-policy', REPORT_POLICY).send(html);
    },
  );

  // Static files: the dashboard and the chart library, from disk, never from a CDN.
  const vendor: Record<string, string> = {
    'uPlot.iife.min.js': join(root, 'node_modules', 'uplot', 'dist', 'uPlot.iife.min.js'),
    'uPlot.min.css': join(root, 'node_modules', 'uplot', 'dist', 'uPlot.min.css'),
  };
  const fileParams = { type: 'object', properties: { file: { type: 'string', maxLength: 100 } }, required: ['file'] } as const;
  app.get('/vendor/:file', { schema: { summary: 'the chart library (uPlot), served from the installed package', params: fileParams, response: { ...errors(400, 404) } } }, async (request, reply) => {
    const { file } = request.params as { file: string };
    const path = Object.hasOwn(vendor, file) ? vendor[file] : undefined;
    if (!path || !existsSync(path)) return send(reply, 'ERR_NOT_FOUND', { detail: `no vendor file ${file.slice(0, 80)}` });
    return sendFile(reply, path);
  });
  app.get('/', { schema: { summary: 'the dashboard page' } }, async (_request, reply) => {
    const path = join(dashboardDir, 'index.html');
    if (!existsSync(path)) return send(reply, 'ERR_NOT_FOUND', { detail: 'the dashboard is not installed (dashboard/index.html is missing)' });
    return sendFile(reply, path);
  });
  app.get('/dashboard/*', { schema: { summary: "the dashboard's scripts and styles", response: { ...errors(404) } } }, async (request, reply) => {
    const relative = (request.params as { '*': string })['*'];
    const path = normalize(join(dashboardDir, relative));
    if (!path.startsWith(dashboardDir + sep) || !existsSync(path) || !insideDirectory(path, dashboardDir)) return send(reply, 'ERR_NOT_FOUND', { detail: `no dashboard file ${relative.slice(0, 80)}` });
    return sendFile(reply, path);
  });
  return app;
}

/** fastify's own request errors, as codes of the catalogue. */
const FRAMEWORK_ERRORS: Record<string, ErrorCode> = {
  FST_ERR_CTP_INVALID_MEDIA_TYPE: 'ERR_MEDIA_TYPE',
  FST_ERR_CTP_BODY_TOO_LARGE: 'ERR_BODY_TOO_LARGE',
  FST_ERR_CTP_INVALID_CONTENT_LENGTH: 'ERR_BODY_LENGTH',
  FST_ERR_CTP_EMPTY_JSON_BODY: 'ERR_BODY_EMPTY',
  FST_ERR_CTP_INVALID_JSON_BODY: 'ERR_BODY_JSON',
};

/** Every error reply: `{ error: CODE, message }` with the status and message of the catalogue. */
function send(reply: FastifyReply, code: ErrorCode, details: ErrorDetails = {}): FastifyReply {
  const error = new PlateauError(code, details);
  return reply.code(error.status).send({ error: error.code, message: error.message });
}

/**
 * Static files are small (the dashboard, uPlot): kept in memory and re-read when their size or
 * modification time changes. A synchronous stat and read of a few kilobytes costs microseconds,
 * while an asynchronous read takes four turns of an event loop that, under a busy rig, waits behind
 * thousands of MQTT messages each time (measured: 100-400 ms per file at 2300 messages/s).
 */
const staticCache = new Map<string, { mtimeMs: number; size: number; body: Buffer }>();

function sendFile(reply: FastifyReply, path: string): FastifyReply {
  const extension = path.slice(path.lastIndexOf('.'));
  const stats = statSync(path);
  let entry = staticCache.get(path);
  if (!entry || entry.mtimeMs !== stats.mtimeMs || entry.size !== stats.size) {
    entry = { mtimeMs: stats.mtimeMs, size: stats.size, body: readFileSync(path) };
    staticCache.set(path, entry);
  }
  return reply
    .header('content-type', CONTENT_TYPES[extension] ?? 'application/octet-stream')
    .header('cache-control', 'no-cache')
    .header('content-security-policy', PAGE_POLICY)
    .send(entry.body);
}

/** Symbolic links must not lead out of the dashboard directory. */
function insideDirectory(path: string, directory: string): boolean {
  try {
    const real = realpathSync(path);
    const base = realpathSync(directory);
    return real.startsWith(base + sep);
  } catch {
    return false;
  }
}

function timingSafeEqual(a: string, b: string): boolean {
  let difference = a.length ^ b.length;
  for (let i = 0; i < b.length; i++) difference |= (a.charCodeAt(i) || 0) ^ b.charCodeAt(i);
  return difference === 0;
}

function readVersion(): string {
  try {
    return String((JSON.parse(readFileSync(join(root, 'package.json'), 'utf8')) as { version?: unknown }).version ?? '0.0.0');
  } catch {
    return '0.0.0';
  }
}

/** A channel's unit as configured or given (`unit`), as people write it (`unitLabel`: °C for Cel or degC), and a conflict note. */
function unitFields(channel: { unit: string | null; unitNote: string | null }): { unit: string | null; unitLabel: string | null; unitNote: string | null } {
  return { unit: channel.unit, unitLabel: channel.unit === null ? null : unitLabel(channel.unit), unitNote: channel.unitNote };
}
