/**
 * The OpenAPI 3.0 description of the HTTP API, served at /api/openapi.json. Written by hand next to
 * the routes in http-app.ts; test/server checks that every route of the app appears here.
 */
export function openApiDocument(): Record<string, unknown> {
  const json = (description: string) => ({ description, content: { 'application/json': { schema: { type: 'object' } } } });
  const error = json('error: { error: code, message }');
  const idParam = [{ name: 'id', in: 'path', required: true, schema: { type: 'string', maxLength: 64 } }];
  const write = { security: [{ token: [] }] };
  return {
    openapi: '3.0.3',
    info: { title: 'plateau', version: '0.1.0', description: 'Steady state and autocorrelation-aware uncertainty of live measurement channels. Not a safety system.' },
    components: { securitySchemes: { token: { type: 'http', scheme: 'bearer', description: 'http.token from the configuration; required for writes when one is set' } } },
    paths: {
      '/healthz': { get: { summary: 'liveness and broker connection', responses: { 200: json('status') } } },
      '/api/counters': { get: { summary: 'samples accepted and rejected by reason, broker, ingest lag, database size', responses: { 200: json('counters') } } },
      '/api/openapi.json': { get: { summary: 'this document', responses: { 200: json('OpenAPI document') } } },
      '/api/channels': { get: { summary: 'every channel: the snapshot of `plateau analyze --json` (view=full) or the live summary (view=summary)', parameters: [{ name: 'view', in: 'query', schema: { type: 'string', enum: ['full', 'summary'] } }], responses: { 200: json('{ channels: [...] }'), 400: error } } },
      '/api/channels/{name}': { get: { summary: 'one channel: snapshot, recent trace, CUSUM trace, stored events', parameters: [{ name: 'name', in: 'path', required: true, schema: { type: 'string' } }, { name: 'trace', in: 'query', schema: { type: 'integer', minimum: 0, maximum: 20000 } }], responses: { 200: json('channel detail'), 404: error } } },
      '/api/events': { get: { summary: 'stored events after an id', parameters: [{ name: 'after', in: 'query', schema: { type: 'integer' } }, { name: 'limit', in: 'query', schema: { type: 'integer', maximum: 1000 } }], responses: { 200: json('{ events: [...] }'), 400: error } } },
      '/api/test-points': {
        get: { summary: 'test points with their verdicts', responses: { 200: json('{ testPoints: [...] }') } },
        post: { ...write, summary: 'create and start a test point', requestBody: { content: { 'application/json': { schema: { type: 'object', required: ['channels'], properties: { id: { type: 'string' }, name: { type: 'string' }, channels: { type: 'array', items: { type: 'string' } }, derived: { type: 'array', items: { type: 'string' } } } } } } }, responses: { 201: json('{ testPoint }'), 400: error, 401: error, 409: error } },
      },
      '/api/test-points/{id}': { get: { summary: 'one test point and its records', parameters: idParam, responses: { 200: json('{ testPoint, records }'), 404: error } } },
      '/api/test-points/{id}/stop': { post: { ...write, summary: 'stop a test point (writes its record)', parameters: idParam, responses: { 200: json('{ testPoint }'), 401: error, 404: error, 409: error } } },
      '/api/test-points/{id}/annotations': { post: { ...write, summary: 'add a note to a test point', parameters: idParam, requestBody: { content: { 'application/json': { schema: { type: 'object', required: ['text'], properties: { text: { type: 'string', maxLength: 2000 } } } } } }, responses: { 201: json('{ testPoint }'), 400: error, 401: error, 404: error } } },
      '/api/test-points/{id}/records': { get: { summary: 'every record of a test point', parameters: idParam, responses: { 200: json('{ records }'), 404: error } } },
      '/api/test-points/{id}/record.json': { get: { summary: 'the latest record', parameters: idParam, responses: { 200: json('record'), 404: error } } },
      '/api/test-points/{id}/record.csv': { get: { summary: 'the latest record as CSV', parameters: idParam, responses: { 200: { description: 'CSV', content: { 'text/csv': {} } }, 404: error } } },
      '/api/test-points/{id}/report': { get: { summary: 'printable report (HTML)', parameters: idParam, responses: { 200: { description: 'HTML', content: { 'text/html': {} } }, 404: error } } },
      '/ws': { get: { summary: 'WebSocket: hello, events at once, channel updates at most four times a second', responses: { 101: { description: 'switching protocols' } } } },
    },
  };
}
