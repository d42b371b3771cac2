/**
 * The error catalogue: every error plateau reports, by code, with the HTTP status it gets when it
 * reaches the API, the exit status it gets when it reaches the command line, and its message
 * template ({name} placeholders filled from the details). One table, as fastify keeps its
 * errors: the server's error handler and the command line read their status from here, and the
 * README lists the codes. A retired code is never reused.
 *
 * Bad input is an error of the caller (4xx, exit status 2); a failing store is the daemon's
 * environment (503: retry later); anything else is a defect (500, exit status 70, logged with
 * its stack).
 */
export interface ErrorEntry {
  /** HTTP status when the error answers a request. */
  status: number;
  /** Exit status of the command line. */
  exit: 2 | 70;
  /** Message template; {name} is replaced by details.name. */
  message: string;
}

const USER = 2 as const;
const INTERNAL = 70 as const;

export const ERRORS = {
  // Command line, configuration and input files.
  ERR_USAGE: { status: 400, exit: USER, message: '{detail}' },
  ERR_INPUT_CSV: { status: 400, exit: USER, message: '{detail}' },
  ERR_CONFIG: { status: 400, exit: USER, message: '{detail}' },
  ERR_CONFIG_DERIVED: { status: 400, exit: USER, message: '{keyPath}: {detail}' },
  ERR_DERIVED_EVALUATION: { status: 422, exit: USER, message: '{detail}' },
  // The store.
  ERR_STORE_SCHEMA_VERSION: { status: 500, exit: USER, message: '{location}: database schema version {version} is newer than this plateau knows ({known})' },
  ERR_STORE_FULL: { status: 503, exit: INTERNAL, message: '{location}: the database or its disk is full ({detail})' },
  ERR_STORE_BUSY: { status: 503, exit: INTERNAL, message: '{location}: the database is locked by another process ({detail})' },
  ERR_STORE_IO: { status: 503, exit: INTERNAL, message: '{location}: the database cannot be read or written ({detail})' },
  ERR_STORE_FAILED: { status: 503, exit: INTERNAL, message: '{location}: the commit failed ({detail})' },
  ERR_STORE_UNAVAILABLE: { status: 503, exit: INTERNAL, message: 'the store is failing since {since} ({detail}): changes are refused until it recovers' },
  // HTTP requests.
  ERR_REQUEST: { status: 400, exit: USER, message: '{detail}' },
  ERR_REQUEST_INVALID: { status: 400, exit: USER, message: 'request {detail}' },
  ERR_REQUEST_URL: { status: 400, exit: USER, message: 'the request URL is not valid (a malformed percent-encoding?)' },
  ERR_REQUEST_URL_TOO_LONG: { status: 414, exit: USER, message: 'a path parameter is longer than {max} characters' },
  ERR_BODY_JSON: { status: 400, exit: USER, message: 'the body is not valid JSON' },
  ERR_BODY_EMPTY: { status: 400, exit: USER, message: 'the content-type is application/json but the body is empty: send a JSON object' },
  ERR_BODY_LENGTH: { status: 400, exit: USER, message: 'the body length does not match the content-length header' },
  ERR_BODY_TOO_LARGE: { status: 413, exit: USER, message: 'the body is larger than the {max} bytes allowed (http.maxBodyBytes)' },
  ERR_MEDIA_TYPE: { status: 415, exit: USER, message: 'send the body as JSON with content-type: application/json' },
  ERR_TOKEN: { status: 401, exit: USER, message: '{detail}' },
  ERR_ORIGIN: { status: 403, exit: USER, message: 'writes from another site are refused (origin {origin})' },
  ERR_NOT_FOUND: { status: 404, exit: USER, message: '{detail}' },
  ERR_CHANNEL_UNKNOWN: { status: 404, exit: USER, message: 'no channel named "{name}"' },
  ERR_TYPE_B_INVALID: { status: 400, exit: USER, message: '{detail}' },
  ERR_DERIVED_UNKNOWN: { status: 404, exit: USER, message: 'no derived result named "{name}" (known: {known})' },
  ERR_EVENT_UNKNOWN: { status: 404, exit: USER, message: 'no stored event {id}' },
  ERR_EVENT_ACKNOWLEDGEMENT: { status: 409, exit: USER, message: 'event {id} is itself an acknowledgement' },
  ERR_RECORD_NONE: { status: 404, exit: USER, message: 'test point {id} has no record yet (one is written when it is ready or stopped)' },
  ERR_RECORD_NO_DERIVED: { status: 404, exit: USER, message: 'the record of test point {id} holds no derived result (start the test point with "derived" to record them)' },
  // Test points (HTTP and the MQTT command topic).
  ERR_TEST_POINT_EMPTY: { status: 400, exit: USER, message: 'a test point needs at least one channel or derived result' },
  ERR_TEST_POINT_CHANNEL: { status: 400, exit: USER, message: '"{name}" is not a valid channel name' },
  ERR_TEST_POINT_CHANNEL_UNKNOWN: { status: 404, exit: USER, message: 'no channel "{name}": no sample of it has arrived (known channels: {known})' },
  ERR_TEST_POINT_DERIVED: { status: 400, exit: USER, message: 'no derived result named "{name}" (known: {known})' },
  ERR_TEST_POINT_SET_POINT: { status: 400, exit: USER, message: 'set point for "{name}": {problem}' },
  ERR_TEST_POINT_ID: { status: 400, exit: USER, message: 'test point id "{id}": letters, digits, _ . - only, up to 64 characters' },
  ERR_TEST_POINT_RUNNING: { status: 409, exit: USER, message: 'test point {id} is already running' },
  ERR_TEST_POINT_UNKNOWN: { status: 404, exit: USER, message: 'no test point {id}' },
  ERR_TEST_POINT_STOPPED: { status: 409, exit: USER, message: 'test point {id} is already stopped' },
  ERR_TEST_POINT_ANNOTATIONS: { status: 409, exit: USER, message: 'test point {id} has {max} annotations, the most it keeps' },
  // Scale-out on NATS JetStream (start-up of a worker).
  ERR_SCALE_UNREACHABLE: { status: 503, exit: USER, message: 'cannot connect to the NATS server at {servers} ({detail})' },
  ERR_SCALE_LAYOUT: { status: 500, exit: USER, message: '{detail}' },
  // The MQTT command topic (in `command-refused` events).
  ERR_COMMAND_PAYLOAD: { status: 400, exit: USER, message: 'command {command}: payload is not a JSON object' },
  ERR_COMMAND_UNKNOWN: { status: 400, exit: USER, message: 'command {command}: unknown command (test-point/start, test-point/stop)' },
  // Defects.
  ERR_INTERNAL: { status: 500, exit: INTERNAL, message: 'internal error (see the daemon log)' },
} as const satisfies Record<string, ErrorEntry>;

export type ErrorCode = keyof typeof ERRORS;

export type ErrorDetails = Record<string, string | number | boolean | null | undefined>;

/** An error of the catalogue: its code, HTTP status and exit status come from the table. */
export class PlateauError extends Error {
  readonly code: ErrorCode;
  readonly status: number;
  readonly exit: 2 | 70;
  readonly details: ErrorDetails;

  constructor(code: ErrorCode, details: ErrorDetails = {}, options: { cause?: unknown } = {}) {
    super(formatMessage(ERRORS[code].message, details), options.cause === undefined ? undefined : { cause: options.cause });
    this.name = 'PlateauError';
    this.code = code;
    this.status = ERRORS[code].status;
    this.exit = ERRORS[code].exit;
    this.details = details;
  }
}

/** The catalogue entry of a code, or undefined for a code that is not plateau's. */
export function errorEntry(code: unknown): ErrorEntry | undefined {
  return typeof code === 'string' && Object.hasOwn(ERRORS, code) ? ERRORS[code as ErrorCode] : undefined;
}

export function formatMessage(template: string, details: ErrorDetails): string {
  return template.replace(/\{(\w+)\}/g, (whole, name: string) => (Object.hasOwn(details, name) ? String(details[name]) : whole));
}
