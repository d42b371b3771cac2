import { createReadStream } from 'node:fs';

/**
 * Reads a delimited text file line by line without holding it in memory, and splits each line
 * into fields (RFC 4180 quoting: a field in double quotes may hold the delimiter, and "" is a
 * quote). Lines end with LF or CRLF. Yields [lineNumber (1-based), fields].
 */
export async function* readDelimitedLines(path: string, delimiter: string): AsyncGenerator<[number, string[]]> {
  const stream = createReadStream(path, { encoding: 'utf8', highWaterMark: 1 << 20 });
  let carry = '';
  let lineNumber = 0;
  let first = true;
  for await (const chunk of stream as AsyncIterable<string>) {
    let text = carry + chunk;
    if (first) {
      if (text.charCodeAt(0) === 0xfeff) text = text.slice(1); // byte-order mark
      first = false;
    }
    let start = 0;
    for (;;) {
      const end = text.indexOf('\n', start);
      if (end < 0) break;
      lineNumber++;
      const lineEnd = end > start && text.charCodeAt(end - 1) === 13 ? end - 1 : end;
      yield [lineNumber, splitFields(text.slice(start, lineEnd), delimiter)];
      start = end + 1;
    }
    carry = text.slice(start);
  }
  if (carry.length > 0) {
    lineNumber++;
    const line = carry.endsWith('\r') ? carry.slice(0, -1) : carry;
    yield [lineNumber, splitFields(line, delimiter)];
  }
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
