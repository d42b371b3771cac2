import { WS_LIMITS } from './ws-hub.js';

/**
 * The OpenAPI 3.0 description of the HTTP API, served at /api/openapi.json. Generated from the
 * routes the app registered (collected by an onRoute hook) and their JSON Schemas, so every route
 * appears with the schemas it really validates against; the WebSocket, which is not a fastify
 * route, is added by hand. HEAD routes (fastify adds one per GET) are left implicit.
 *
 * Conversions: fastify's `:name` becomes `{name}`, the wildcard `*` becomes `{path}`; route
 * schema keys `summary`, `description` and `security` are copied to the operation; `params` and
 * `querystring` properties become parameters; `body` becomes the JSON request body; `response`
 * entries become responses (JSON content; CSV and HTML routes say so).
 */
export interface DocumentedRoute {
  method: string;
  url: string;
  schema: Record<string, unknown>;
}

type JsonSchema = { type?: unknown; properties?: Record<string, unknown>; required?: string[]; [key: string]: unknown };

const RAW_CONTENT: Record<string, { type: string; description: string }> = {
  '/api/test-points/:id/record.csv': { type: 'text/csv', description: 'the record, one row per channel' },
  '/api/test-points/:id/record-derived.csv': { type: 'text/csv', description: "the record's derived results, one row per derived result" },
  '/api/test-points/:id/report': { type: 'text/html', description: 'the printable report' },
  '/': { type: 'text/html', description: 'the dashboard page' },
  '/dashboard/*': { type: 'text/javascript', description: 'a dashboard file (JavaScript, CSS)' },
  '/vendor/:file': { type: 'text/javascript', description: 'uPlot (JavaScript or CSS)' },
};

export function openApiPath(url: string): string {
  return url.replace(/:([A-Za-z0-9_]+)/g, '{$1}').replace(/\*$/, '{path}');
}

export function openApiDocument(routes: DocumentedRoute[], version: string): Record<string, unknown> {
  const paths: Record<string, Record<string, unknown>> = {};
  for (const route of routes) {
    const method = route.method.toLowerCase();
    if (method === 'head') continue;
    const path = openApiPath(route.url);
    const schema = route.schema;
    const operation: Record<string, unknown> = {};
    for (const key of ['summary', 'description', 'security'] as const) if (schema[key] !== undefined) operation[key] = schema[key];
    const parameters = [...parametersOf(schema.params as JsonSchema | undefined, 'path'), ...parametersOf(schema.querystring as JsonSchema | undefined, 'query')];
    if (route.url.endsWith('*')) parameters.push({ name: 'path', in: 'path', required: true, schema: { type: 'string' } });
    if (parameters.length > 0) operation.parameters = parameters;
    if (schema.body) operation.requestBody = { required: !isNullable(schema.body as JsonSchema), content: { 'application/json': { schema: toOpenApiSchema(schema.body) } } };
    operation.responses = responsesOf(route, schema.response as Record<string, unknown> | undefined);
    (paths[path] ??= {})[method] = operation;
  }
  paths['/ws'] = {
    get: {
      summary: 'WebSocket (upgrade): hello with every channel, every derived result, the test points and the latest events; then events at once and channel and derived-result updates at most every ' +
        `${WS_LIMITS.updateIntervalMs} ms; a beat every ${WS_LIMITS.beatMs} ms when nothing else was sent`,
      description: 'Messages are JSON text frames: {type:"hello"}, {type:"event"}, {type:"channels"}, {type:"derived"}, {type:"testPoints"}, {type:"beat"}. Clients send nothing (frames above ' +
        `${WS_LIMITS.maxPayloadBytes} bytes close the connection). A connection whose Origin names another site is refused (403).`,
      responses: { 101: { description: 'switching protocols' }, 403: { description: 'cross-site origin' }, 503: { description: 'too many clients' } },
    },
  };
  return {
    openapi: '3.0.3',
    info: {
      title: 'plateau',
      version,
      description: 'Steady state and autocorrelation-aware uncertainty of live measurement channels. Errors are { error: CODE, message }. Not a safety system.',
    },
    components: { securitySchemes: { token: { type: 'http', scheme: 'bearer', description: 'http.token from the configuration; every write needs it when one is set (required beyond loopback)' } } },
    paths,
  };
}

function parametersOf(schema: JsonSchema | undefined, where: 'path' | 'query'): Record<string, unknown>[] {
  if (!schema?.properties) return [];
  return Object.entries(schema.properties).map(([name, property]) => ({
    name,
    in: where,
    required: where === 'path' || (schema.required ?? []).includes(name),
    schema: toOpenApiSchema(property),
  }));
}

function responsesOf(route: DocumentedRoute, response: Record<string, unknown> | undefined): Record<string, unknown> {
  const out: Record<string, unknown> = {};
  const raw = RAW_CONTENT[route.url];
  if (raw) out[200] = { description: raw.description, content: { [raw.type]: {} } };
  for (const [status, schema] of Object.entries(response ?? {})) {
    const description = typeof (schema as JsonSchema).description === 'string' ? ((schema as JsonSchema).description as string) : Number(status) >= 400 ? 'error: { error: CODE, message }' : 'success';
    out[status] = { description, content: { 'application/json': { schema: toOpenApiSchema(schema) } } };
  }
  if (Object.keys(out).length === 0) out[200] = { description: 'success' };
  return out;
}

function isNullable(schema: JsonSchema): boolean {
  return Array.isArray(schema.type) && schema.type.includes('null');
}

/** JSON Schema (draft 7, as fastify validates) to the OpenAPI 3.0 dialect: type arrays with null become nullable. */
export function toOpenApiSchema(schema: unknown): unknown {
  if (Array.isArray(schema)) return schema.map(toOpenApiSchema);
  if (!schema || typeof schema !== 'object') return schema;
  const out: Record<string, unknown> = {};
  for (const [key, value] of Object.entries(schema as Record<string, unknown>)) {
    if (key === 'type' && Array.isArray(value)) {
      const types = value.filter((t) => t !== 'null');
      if (types.length === 1) out.type = types[0];
      else out.anyOf = types.map((t) => ({ type: t }));
      if (types.length !== value.length) out.nullable = true;
    } else if (key === 'properties' && value && typeof value === 'object') {
      out.properties = Object.fromEntries(Object.entries(value as Record<string, unknown>).map(([k, v]) => [k, toOpenApiSchema(v)]));
    } else if (key === 'items' || key === 'additionalProperties' || key === 'anyOf' || key === 'oneOf' || key === 'allOf') {
      out[key] = toOpenApiSchema(value);
    } else out[key] = value;
  }
  return out;
}
