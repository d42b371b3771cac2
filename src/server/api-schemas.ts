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
    samplesNeeded: nullableNumber,
    note: { type: 'string' },
  },
  additionalProperties: true,
} as const;

export const channelState = { type: 'string', enum: ['warming', 'steady', 'precise', 'unsteady', 'stale'] } as const;

/** Is the channel's mean ready to record, and if not, what it still waits for (engine/channel-verdict.ts). */
const channelVerdict = {
  type: 'object',
  properties: {
    ready: { type: 'boolean' },
    summary: { type: 'string' },
    pending: {
      type: 'array',
      items: {
        type: 'object',
        properties: {
          condition: { type: 'string', enum: ['no-data', 'stale', 'constant', 'warm-up', 'effective-samples', 'break', 'long-memory', 'target'] },
          message: { type: 'string' },
          samplesToGo: nullableNumber,
          secondsToGo: nullableNumber,
        },
        additionalProperties: true,
      },
    },
  },
  additionalProperties: true,
} as const;

/** A stability rule at a glance (src/engine/criteria/channel-criteria.ts): the summary's and the snapshot's fields. */
export const criterionBrief = {
  type: 'object',
  required: ['name', 'holds', 'since', 'value', 'tolerance', 'margin'],
  properties: {
    name: { type: 'string' },
    holds: { type: 'boolean' },
    met: { type: 'boolean' },
    since: nullableNumber,
    value: nullableNumber,
    tolerance: nullableNumber,
    margin: nullableNumber,
    secondsToHold: nullableNumber,
  },
  additionalProperties: true,
} as const;

/** The light view pushed over the WebSocket and returned by /api/channels?view=summary. */
export const channelSummary = {
  type: 'object',
  required: ['name', 'state', 'n', 'received', 'confidence'],
  properties: {
    name: { type: 'string' },
    unit: nullableString,
    unitLabel: nullableString,
    unitNote: nullableString,
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
    estimator: nullableString,
    verdict: channelVerdict,
    criteria: { type: 'array', items: criterionBrief },
    readyUnderPolicy: { type: ['boolean', 'null'] },
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
    unitLabel: nullableString,
    unitNote: nullableString,
    n: { type: 'integer' },
    state: channelState,
    confidence: { type: 'number' },
    estimator: { type: 'string' },
    estimatorReason: { type: 'string' },
    verdict: channelVerdict,
    criteria: { type: 'array', items: criterionBrief },
    readiness: { type: ['object', 'null'], additionalProperties: true },
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
    setPoints: { type: 'object', additionalProperties: { type: 'number' } },
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
    gaps: {
      type: 'array',
      description: 'samples that never came, between the first and the last time of the trace (seconds since the epoch)',
      items: { type: 'object', properties: { from: { type: 'number' }, to: { type: 'number' }, missing: { type: 'integer' }, source: { type: 'string', enum: ['time-stamps', 'sequence'] } }, additionalProperties: false },
    },
  },
  additionalProperties: false,
} as const;

/** A channel's refused samples by reason and its gaps since the daemon started (ChannelIntake in src/ports/daemon-api.ts). */
export const channelIntake = {
  type: 'object',
  description: 'since the daemon started: samples refused for this channel by reason (payloads that named it before failing; a payload not read at all counts in /api/counters only) and its gaps, the newest 50 listed',
  required: ['refused', 'gaps'],
  properties: {
    refused: { type: 'object', required: ['total', 'byReason'], properties: { total: { type: 'integer' }, byReason: { type: 'object', additionalProperties: { type: 'integer' } } }, additionalProperties: false },
    gaps: {
      type: 'object',
      required: ['count', 'missingSamples', 'recent'],
      properties: {
        count: { type: 'integer' },
        missingSamples: { type: 'integer' },
        sequenceGaps: { type: 'integer' },
        intervalMs: nullableNumber,
        learned: { type: 'boolean' },
        recent: { type: 'array', items: { type: 'object', properties: { from: { type: 'string' }, to: { type: 'string' }, missing: { type: 'integer' }, source: { type: 'string', enum: ['time-stamps', 'sequence'] } }, additionalProperties: false } },
      },
      additionalProperties: false,
    },
  },
  additionalProperties: false,
} as const;

const derivedInterval = {
  type: ['object', 'null'],
  properties: { standardUncertainty: { type: 'number' }, dof: nullableNumber, coverageFactor: nullableNumber, expandedUncertainty: nullableNumber },
  additionalProperties: true,
} as const;

/**
 * A derived result (src/server/derived-live.ts): the field names of the `derived` entries of
 * `plateau analyze --json`, without the record-only checks monteCarlo and bootstrap.
 */
export const derivedResult = {
  type: 'object',
  required: ['name', 'unit', 'expression', 'inputs', 'ready', 'value', 'standardUncertainty', 'confidence', 'estimator', 'budget', 'covarianceTerms', 'rows', 'atTarget', 'inputStates', 'waitingFor', 'statement'],
  properties: {
    name: { type: 'string' },
    unit: nullableString,
    expression: { type: 'string' },
    inputs: { type: 'array', items: { type: 'string' } },
    ready: { type: 'boolean' },
    value: nullableNumber,
    standardUncertainty: nullableNumber,
    dof: nullableNumber,
    dofMethod: { type: ['string', 'null'], enum: ['batches', 'observations', null] },
    coverageFactor: nullableNumber,
    expandedUncertainty: nullableNumber,
    confidence: { type: 'number' },
    estimator: { type: 'string' },
    target: targetStatus,
    budget: {
      type: 'array',
      description: "each input: its mean, u(x_i), sensitivity c_i, contribution c_i u(x_i), varianceShare c_i^2 u^2(x_i) / u_c^2 and share c_i (U_x c)_i / u_c^2 (the shares add to 1; one can be negative)",
      items: {
        type: 'object',
        required: ['channel', 'mean', 'standardUncertainty', 'sensitivity', 'contribution', 'varianceShare', 'share'],
        properties: { channel: { type: 'string' }, mean: { type: 'number' }, standardUncertainty: { type: 'number' }, sensitivity: { type: 'number' }, contribution: { type: 'number' }, varianceShare: nullableNumber, share: nullableNumber },
        additionalProperties: true,
      },
    },
    covarianceTerms: {
      type: 'array',
      description: 'each pair of inputs: the correlation of their means and the term 2 c_i c_j u(x_i, x_j) of u_c^2 (negative terms reduce u_c)',
      items: {
        type: 'object',
        required: ['channels', 'correlation', 'term'],
        properties: { channels: { type: 'array', items: { type: 'string' } }, correlation: nullableNumber, term: { type: 'number' } },
        additionalProperties: true,
      },
    },
    covarianceShare: nullableNumber,
    independent: derivedInterval,
    correlation: { type: 'object', additionalProperties: { type: 'number' } },
    rows: { type: 'integer' },
    bucketSeconds: nullableNumber,
    batches: nullableNumber,
    batchSize: nullableNumber,
    multivariateEss: nullableNumber,
    rowRate: nullableNumber,
    window: { type: ['object', 'null'], properties: { startSeconds: { type: 'number' }, endSeconds: { type: 'number' } }, additionalProperties: true },
    counts: { type: 'object', additionalProperties: true },
    notes: { type: 'array', items: { type: 'string' } },
    atTarget: { type: ['boolean', 'null'] },
    inputStates: { type: 'object', additionalProperties: { type: 'string' } },
    waitingFor: { type: 'array', items: { type: 'string' } },
    statement: { type: 'string' },
  },
  additionalProperties: true,
} as const;
