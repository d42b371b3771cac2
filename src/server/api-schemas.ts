/**
 * JSON Schemas of the HTTP API: requests are validated against them (fastify's ajv) and responses
 * are serialised through them. The OpenAPI description (openapi.ts) is generated from the same
 * route schemas, so the document cannot drift from the routes.
 *
 * Response schemas name the fields a client may rely on and allow more (additionalProperties:
 * true): the channel snapshot is the `plateau analyze --json` contract, documented in the README,
 * and is passed through whole. Nullable numbers are typed ['number', 'null'] so the serialiser
 * never turns a null into 0.
 */
export const NAME_PATTERN = '^[\\p{L}\\p{N}_.:\\-/]{1,128}$';
export const TEST_POINT_ID_PATTERN = '^[A-Za-z0-9][A-Za-z0-9_.\\-]{0,63}$';

const nullableNumber = { type: ['number', 'null'] } as const;
const nullableString = { type: ['string', 'null'] } as const;

export const errorReply = {
  type: 'object',
  description: 'every 4xx and 5xx: a stable code and one line for a person',
  required: ['error', 'message'],
  properties: { error: { type: 'string' }, message: { type: 'string' } },
  additionalProperties: false,
} as const;

const targetStatus = {
  type: ['object', 'null'],
  properties: {
    bound: nullableNumber,
    value: { type: 'number' },
    relative: { type: 'boolean' },
    on: { type: 'string', enum: ['u', 'U'] },
    reached: { type: 'boolean' },
    samplesToTarget: nullableNumber,
    secondsToTarget: nullableNumber,
    progress: { type: 'number' },
    note: { type: 'string' },
  },
  additionalProperties: true,
} as const;

export const channelState = { type: 'string', enum: ['warming', 'steady', 'precise', 'unsteady', 'stale'] } as const;

/** The light view pushed over the WebSocket and returned by /api/channels?view=summary. */
export const channelSummary = {
  type: 'object',
  required: ['name', 'state', 'n', 'received', 'confidence'],
  properties: {
    name: { type: 'string' },
    unit: nullableString,
    state: channelState,
    n: { type: 'integer' },
    received: { type: 'integer' },
    last: { type: ['object', 'null'], properties: { value: { type: 'number' }, time: nullableNumber }, additionalProperties: true },
    mean: nullableNumber,
    standardUncertainty: nullableNumber,
    expandedUncertainty: nullableNumber,
    coverageFactor: nullableNumber,
    dof: nullableNumber,
    confidence: { type: 'number' },
    tauInt: nullableNumber,
    nEff: nullableNumber,
    excluded: { type: 'integer' },
    target: targetStatus,
  },
  additionalProperties: true,
} as const;

/** The full snapshot (`plateau analyze --json`, one channel): passed through whole. */
export const channelSnapshot = {
  type: 'object',
  required: ['name', 'n', 'state', 'confidence', 'estimator'],
  properties: {
    name: { type: 'string' },
    unit: nullableString,
    n: { type: 'integer' },
    state: channelState,
    confidence: { type: 'number' },
    estimator: { type: 'string' },
  },
  additionalProperties: true,
} as const;

export const storedEvent = {
  type: 'object',
  required: ['id', 'timeMs', 'source', 'kind', 'at', 'body'],
  properties: {
    id: { type: 'integer' },
    timeMs: { type: 'number' },
    source: { type: 'string' },
    kind: { type: 'string' },
    at: { type: ['integer', 'null'] },
    body: { type: 'object', additionalProperties: true },
  },
  additionalProperties: false,
} as const;

const verdictEntry = {
  type: 'object',
  properties: { channel: { type: 'string' }, state: { type: 'string' }, reached: { type: 'boolean' } },
  additionalProperties: true,
} as const;

export const testPoint = {
  type: 'object',
  required: ['id', 'name', 'channels', 'state', 'createdMs'],
  properties: {
    id: { type: 'string' },
    name: { type: 'string' },
    channels: { type: 'array', items: { type: 'string' } },
    derived: { type: 'array', items: { type: 'string' } },
    state: { type: 'string', enum: ['running', 'ready', 'stopped'] },
    createdMs: { type: 'number' },
    readyMs: nullableNumber,
    stoppedMs: nullableNumber,
    annotations: { type: 'array', items: { type: 'object', properties: { timeMs: { type: 'number' }, text: { type: 'string' } }, additionalProperties: false } },
    verdict: { type: 'array', items: verdictEntry },
  },
  additionalProperties: true,
} as const;

export const recordRow = {
  type: 'object',
  required: ['id', 'createdMs', 'body'],
  properties: { id: { type: 'integer' }, createdMs: { type: 'number' }, body: { type: 'object', additionalProperties: true } },
  additionalProperties: false,
} as const;

export const testPointRecord = {
  type: 'object',
  required: ['testPoint', 'kind', 'createdAt', 'entries', 'caution'],
  properties: {
    testPoint: { type: 'object', properties: { id: { type: 'string' }, name: { type: 'string' } }, additionalProperties: true },
    kind: { type: 'string', enum: ['ready', 'stopped'] },
    createdAt: { type: 'string' },
    entries: { type: 'array', items: { type: 'object', additionalProperties: true } },
    derived: { type: 'array', items: {} },
    caution: { type: 'string' },
  },
  additionalProperties: true,
} as const;

export const acknowledgement = {
  type: 'object',
  required: ['eventId', 'recordId', 'timeMs', 'note'],
  properties: { eventId: { type: 'integer' }, recordId: { type: 'integer' }, timeMs: { type: 'number' }, note: nullableString },
  additionalProperties: false,
} as const;

export const channelTraceSchema = {
  type: 'object',
  description: 'recent samples; leading samples before windowStartIndex are outside the averaging window (warm-up or before the test point)',
  properties: {
    firstIndex: { type: 'integer' },
    times: { type: 'array', items: nullableNumber },
    values: { type: 'array', items: { type: 'number' } },
    windowStartIndex: { type: 'integer' },
    originIndex: { type: 'integer' },
    beforeWindow: { type: 'integer' },
  },
  additionalProperties: false,
} as const;
