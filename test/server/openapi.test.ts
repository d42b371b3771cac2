import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { FastifyInstance } from 'fastify';
import { buildHttpApp } from '../../src/server/http-app.js';
import { openApiPath, toOpenApiSchema } from '../../src/server/openapi.js';
import { makeTestDaemon, type TestDaemon } from './harness.js';

// The OpenAPI description served by the daemon lists every route the app registers, with the
// schemas the route validates against. The app's routes are read independently here, from
// fastify's own route table (printRoutes), so a route added without documentation would fail.

let t: TestDaemon;
let app: FastifyInstance;

beforeAll(async () => {
  t = await makeTestDaemon();
  app = buildHttpApp(t.daemon, { token: 'openapi-test-token-000', maxBodyBytes: 4096 });
  await app.ready();
});

afterAll(async () => {
  await app.close();
  await t.close();
});

async function document(): Promise<{ openapi: string; paths: Record<string, Record<string, Record<string, unknown>>>; components: Record<string, unknown> }> {
  const response = await app.inject({ method: 'GET', url: '/api/openapi.json' });
  expect(response.statusCode).toBe(200);
  return response.json();
}

describe('GET /api/openapi.json', () => {
  it('is OpenAPI 3.0 and lists every route of the app (HEAD routes are implicit)', async () => {
    const doc = await document();
    expect(doc.openapi).toBe('3.0.3');
    const documented = Object.keys(doc.paths);
    // Every route fastify knows, by method and path.
    const known = listRoutes(app);
    expect(known.length).toBeGreaterThanOrEqual(18);
    for (const { method, url } of known) {
      if (method === 'HEAD') continue;
      const path = openApiPath(url);
      expect(documented, `${method} ${url}`).toContain(path);
      expect(doc.paths[path]?.[method.toLowerCase()], `${method} ${url}`).toBeDefined();
    }
  });

  it('documents no route the app does not have (besides the WebSocket)', async () => {
    const doc = await document();
    const known = new Set(listRoutes(app).map((r) => `${r.method.toLowerCase()} ${openApiPath(r.url)}`));
    for (const [path, operations] of Object.entries(doc.paths)) {
      for (const method of Object.keys(operations)) {
        if (path === '/ws') continue;
        expect(known.has(`${method} ${path}`), `${method} ${path}`).toBe(true);
      }
    }
    expect(doc.paths['/ws']?.get).toBeDefined();
  });

  it('writes carry the token security requirement; reads do not', async () => {
    const doc = await document();
    for (const [path, operations] of Object.entries(doc.paths)) {
      for (const [method, operation] of Object.entries(operations)) {
        if (method === 'post' || method === 'put') expect(operation.security, `${method} ${path}`).toEqual([{ token: [] }]);
        else expect(operation.security, `${method} ${path}`).toBeUndefined();
      }
    }
    expect(doc.components).toHaveProperty('securitySchemes.token');
  });

  it('parameters, bodies and error responses come from the route schemas', async () => {
    const doc = await document();
    const start = doc.paths['/api/test-points']?.post as { requestBody: { content: Record<string, { schema: { required: string[] } }> }; responses: Record<string, unknown> };
    expect(start.requestBody.content['application/json']?.schema.required).toEqual(['channels']);
    expect(Object.keys(start.responses).sort()).toEqual(['201', '400', '401', '403', '409', '413', '415']);
    const detail = doc.paths['/api/channels/{name}']?.get as { parameters: { name: string; in: string }[] };
    expect(detail.parameters.map((p) => `${p.in}:${p.name}`)).toEqual(['path:name', 'query:trace', 'query:events']);
    const csv = doc.paths['/api/test-points/{id}/record.csv']?.get as { responses: Record<string, { content: Record<string, unknown> }> };
    expect(Object.keys(csv.responses['200']?.content ?? {})).toEqual(['text/csv']);
  });

  it('nullable JSON Schema types become OpenAPI 3.0 nullable', () => {
    expect(toOpenApiSchema({ type: ['number', 'null'] })).toEqual({ type: 'number', nullable: true });
    expect(toOpenApiSchema({ type: 'object', properties: { a: { type: ['string', 'null'] } } })).toEqual({ type: 'object', properties: { a: { type: 'string', nullable: true } } });
    expect(openApiPath('/api/test-points/:id/stop')).toBe('/api/test-points/{id}/stop');
    expect(openApiPath('/dashboard/*')).toBe('/dashboard/{path}');
  });
});

/**
 * The routes fastify registered, rebuilt from its radix-tree print (printRoutes()): each line is a
 * path fragment indented four characters per level, with "(METHODS)" where a route ends.
 */
function listRoutes(instance: FastifyInstance): { method: string; url: string }[] {
  const out: { method: string; url: string }[] = [];
  const stack: string[] = [];
  for (const line of instance.printRoutes().split('\n')) {
    const match = /^([\s│├└─]*?)(?:[├└]── )(.+?)(?: \(([A-Z, ]+)\))?$/.exec(line);
    if (!match) continue;
    const depth = Math.round((match[1] as string).length / 4);
    stack.length = depth;
    stack.push(match[2] as string);
    if (match[3]) for (const method of match[3].split(', ')) out.push({ method, url: stack.join('') });
  }
  return out;
}
