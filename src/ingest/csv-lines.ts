import { createReadStream } from 'node:fs';

/**
 * Reads a delimited text file line by line without holding it in memory, and splits each line
 * into fields (RFC 4180 quoting: a field in double quotes may hold the delimiter, and "" is a
 * quote). Lines end with LF or CRLF. Yields [lineNumber (1-based), fields].
 */
export async function* readDelimitedLines(path: string, delimiter: string): AsyncGenerator<[number, string[]]> {
  for await (const batch of readLineBatches(path)) {
    for (let i = 0; i < batch.lines.length; i++) yield [batch.firstLine + i, splitFields(batch.lines[i] as string, delimiter)];
  }
}

/**
 * Reads a text file in large chunks and yields its lines in batches (one batch per chunk), so that a
 * caller can process a million rows synchronously instead of awaiting each one. Lines end with LF
 * or CRLF; a byte-order mark is dropped. `firstLine` is the 1-based number of the batch's first line.
 */
export async function* readLineBatches(path: string): AsyncGenerator<{ firstLine: number; lines: string[] }> {
  const stream = createReadStream(path, { encoding: 'utf8', highWaterMark: 1 << 20 });
  let carry = '';
  let lineNumber = 1;
  let first = true;
  for await (const chunk of stream as AsyncIterable<string>) {
    let text = carry + chunk;
    if (first) {
      if (text.charCodeAt(0) === 0xfeff) text = text.slice(1);
      first = false;
    }
    const lines = text.split('\n');
    carry = lines.pop() as string;
    for (let i = 0; i < lines.length; i++) {
      const line = lines[i] as string;
      if (line.charCodeAt(line.length - 1) === 13) lines[i] = line.slice(0, -1);
    }
    if (lines.length > 0) {
      yield { firstLine: lineNumber, lines };
      lineNumber += lines.length;
    }
  }
  if (carry.length > 0) yield { firstLine: lineNumber, lines: [carry.endsWith('\r') ? carry.slice(0, -1) : carry] };
}

export function splitFields(line: string, delimiter: string): string[] {
  if (line.indexOf('"') < 0) return line.split(delimiter);
  const fields: string[] = [];
  let field = '';
  let quoted = false;
  for (let i = 0; i < line.length; i++) {
    const ch = line[i] as string;
    if (quoted) {
      if (ch === '"') {
        if (line[i + 1] === '"') {
          field += '"';
          i++;
        } else quoted = false;
      } else field += ch;
    } else if (ch === '"') quoted = true;
    else if (ch === delimiter) {
      fields.push(field);
      field = '';
    } else field += ch;
  }
  fields.push(field);
  return fields;
}

/** Picks the delimiter of a header line: comma, semicolon or tab, whichever splits it most. */
export function guessDelimiter(headerLine: string): string {
  let best = ',';
  let bestCount = 0;
  for (const candidate of [',', ';', '\t']) {
    const count = headerLine.split(candidate).length - 1;
    if (count > bestCount) {
      best = candidate;
      bestCount = count;
    }
  }
  return best;
}
