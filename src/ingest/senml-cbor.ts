import { Decoder } from 'cbor-x';

/**
 * SenML in CBOR (RFC 8428, section 6, application/senml+cbor): a CBOR array of maps whose keys are
 * the integer labels of Table 4 (bver -1, bn -2, bt -3, bu -4, bv -5, bs -6, n 0, u 1, v 2, vs 3,
 * vb 4, s 5, t 6, ut 7, vd 8) or, for extensions, text labels. Numbers may be integers, floats of
 * any width or decimal fractions (CBOR tag 4), which cbor-x turns into numbers.
 *
 * `senmlCborRecords` turns the bytes into the records of the JSON form (the same labels as JSON
 * member names), so that one reader (payload-decoder's decodeSenml) interprets both and a CBOR pack
 * gives exactly the samples of its JSON form. Records are `SenmlRecord`s: every label of Table 4 an
 * own property (undefined when absent; one shape for every record, which V8 reads fast) and nothing
 * else (text labels such as "__proto__" are dropped): nothing in a hostile payload can reach an
 * object's prototype. Any failure of the CBOR reader (truncated input, lengths beyond
 * the limits, nesting that exhausts the stack) comes back as a message, never as an exception.
 */
const LABELS: ReadonlyMap<number, string> = new Map([
  [-1, 'bver'],
  [-2, 'bn'],
  [-3, 'bt'],
  [-4, 'bu'],
  [-5, 'bv'],
  [-6, 'bs'],
  [0, 'n'],
  [1, 'u'],
  [2, 'v'],
  [3, 'vs'],
  [4, 'vb'],
  [5, 's'],
  [6, 't'],
  [7, 'ut'],
  [8, 'vd'],
]);
const TEXT_LABELS = new Set(LABELS.values());

/** One SenML record with the labels of Table 4 as its own properties (undefined when absent). */
class SenmlRecord {
  bver: unknown = undefined;
  bn: unknown = undefined;
  bt: unknown = undefined;
  bu: unknown = undefined;
  bv: unknown = undefined;
  bs: unknown = undefined;
  n: unknown = undefined;
  u: unknown = undefined;
  v: unknown = undefined;
  vs: unknown = undefined;
  vb: unknown = undefined;
  s: unknown = undefined;
  t: unknown = undefined;
  ut: unknown = undefined;
  vd: unknown = undefined;
}

/** Maps as Map (integer keys stay integers), no record extension of cbor-x. */
const decoder = new Decoder({ mapsAsObjects: false, useRecords: false });

export type SenmlCborResult = { records: unknown[] } | { error: string };

export function senmlCborRecords(payload: Uint8Array, maxRecords: number): SenmlCborResult {
  let document: unknown;
  try {
    document = decoder.decode(payload);
  } catch (error) {
    return { error: `payload is not CBOR (${(error as Error).message.slice(0, 80)})` };
  }
  if (!Array.isArray(document)) return { error: `SenML CBOR needs an array of records, got ${cborTypeName(document)}` };
  if (document.length > maxRecords) return { error: `${document.length} records in one pack, more than the ${maxRecords} allowed` };
  const records: unknown[] = new Array(document.length);
  for (let i = 0; i < document.length; i++) {
    const item: unknown = document[i];
    if (!(item instanceof Map)) {
      records[i] = item; // the reader names it as a record of the wrong type
      continue;
    }
    const record = new SenmlRecord() as unknown as Record<string, unknown>;
    for (const [key, value] of item as Map<unknown, unknown>) {
      const label = typeof key === 'number' ? LABELS.get(key) : typeof key === 'string' && TEXT_LABELS.has(key) ? key : undefined;
      if (label !== undefined) record[label] = typeof value === 'bigint' ? bigintValue(value) : value;
    }
    records[i] = record;
  }
  return { records };
}

/** A CBOR integer beyond 2^53 as a number when it is exact, else left as a non-number (refused by the reader). */
function bigintValue(value: bigint): number | bigint {
  const n = Number(value);
  return Number.isSafeInteger(n) ? n : value;
}

function cborTypeName(value: unknown): string {
  if (value === null) return 'null';
  if (value === undefined) return 'undefined';
  if (value instanceof Map) return 'a map';
  if (value instanceof Uint8Array) return 'a byte string';
  return `a ${typeof value}`;
}
