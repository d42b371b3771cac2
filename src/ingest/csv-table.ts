import { access, stat } from 'node:fs/promises';
import { guessDelimiter, readDelimitedLines, readLineBatches, splitFields } from './csv-lines.js';
import { isCommaDecimal, parseCommaMeasurement, parseDecimalSpan, parseMeasurement, PROBLEM_TEXT, type ValueProblem } from './cell-value.js';
import { constants, createReadStream } from 'node:fs';
import { PlateauError } from '../errors/catalogue.js';

/**
 * A logged CSV file read as measurement channels: a header row, every numeric column a channel,
 * an optional time column (numbers in seconds, or ISO 8601 date-times).
 *
 * Column roles are decided from the first rows (up to PROBE_ROWS): a column is a channel when most
 * of its non-empty cells there are numbers. Later cells that are not finite numbers are skipped,
 * counted per channel with the row of the first few, and never reach a statistic.
 * Decimal commas ("21,375" in a file whose fields are separated by ";" or tab, as loggers set to many
 * European locales write) are detected from the same rows, or asked for (`decimalComma: true`);
 * `layout.decimalComma` says which, and every number is then read with a decimal comma.
 */
export class CsvInputError extends PlateauError {
  constructor(message: string) {
    super('ERR_INPUT_CSV', { detail: message });
    this.name = 'CsvInputError';
  }
}

export interface CsvColumnIssue {
  problem: ValueProblem | 'missing';
  count: number;
  firstRows: number[];
}

export interface CsvChannelColumn {
  name: string;
  index: number;
  issues: Map<ValueProblem | 'missing', CsvColumnIssue>;
}

export interface CsvLayout {
  path: string;
  delimiter: string;
  header: string[];
  channels: CsvChannelColumn[];
  timeColumn: { name: string; index: number; kind: 'seconds' | 'date' } | null;
  ignored: string[];
  /** Numbers are written with a decimal comma: 'detected' from the first rows, 'asked' by the caller, or false. */
  decimalComma: 'detected' | 'asked' | false;
}

const PROBE_ROWS = 100;
const TIME_NAMES = /^(t|time|times|timestamp|datetime|date|date_time|seconds|secs|time_s|time_sec|elapsed|elapsed_s|epoch|unix_time)$/i;

export async function probeCsv(path: string, options: { timeColumn?: string; delimiter?: string; decimalComma?: boolean } = {}): Promise<CsvLayout> {
  let info;
  try {
    await access(path, constants.R_OK);
    info = await stat(path);
  } catch (error) {
    const code = (error as NodeJS.ErrnoException).code;
    if (code === 'EACCES' || code === 'EPERM') throw new CsvInputError(`${path}: not readable (permission denied)`);
    throw new CsvInputError(`${path}: no such file`);
  }
  if (info.isDirectory()) throw new CsvInputError(`${path}: is a directory; give a CSV file inside it`);
  if (!info.isFile() && !info.isFIFO()) throw new CsvInputError(`${path}: not a regular file (a CSV file is needed)`);
  const headerLine = await firstLine(path);
  if (headerLine === null || headerLine.trim() === '') throw new CsvInputError(`${path}: the file is empty (a header row is needed)`);
  const delimiter = options.delimiter ?? guessDelimiter(headerLine);
  const header = splitFields(headerLine, delimiter).map((name) => name.trim());
  header.forEach((name, i) => {
    if (name === '') header[i] = `column${i + 1}`;
  });
  const seen = new Set<string>();
  for (const name of header) {
    if (seen.has(name)) throw new CsvInputError(`${path} row 1: column name "${name}" appears twice`);
    seen.add(name);
  }
  if (options.decimalComma && delimiter === ',') throw new CsvInputError(`${path}: --decimal-comma needs fields separated by ";" or tab, and this file's header is separated by ","`);
  const numeric = header.map(() => 0);
  const commaNumeric = header.map(() => 0);
  const dates = header.map(() => 0);
  const filled = header.map(() => 0);
  let rows = 0;
  for await (const [line, fields] of readDelimitedLines(path, delimiter)) {
    if (line === 1) continue;
    if (rows++ >= PROBE_ROWS) break;
    fields.forEach((cell, i) => {
      if (i >= header.length || cell.trim() === '') return;
      filled[i]!++;
      if (typeof parseMeasurement(cell) === 'number') numeric[i]!++;
      else if (delimiter !== ',' && isCommaDecimal(cell)) commaNumeric[i]!++;
      else if (!Number.isNaN(Date.parse(cell.trim()))) dates[i]!++;
    });
  }
  // Decimal commas: asked for, or found in the first rows (some cell of a column reads as a number
  // only with a decimal comma, and no other reading of the file's columns explains it).
  const decimalComma: CsvLayout['decimalComma'] = options.decimalComma ? 'asked' : commaNumeric.some((count) => count > 0) ? 'detected' : false;
  if (decimalComma) header.forEach((_n, i) => (numeric[i] = numeric[i]! + commaNumeric[i]!));
  if (rows === 0) throw new CsvInputError(`${path}: no data rows after the header`);
  let timeColumn: CsvLayout['timeColumn'] = null;
  if (options.timeColumn !== undefined) {
    const index = header.indexOf(options.timeColumn);
    if (index < 0) throw new CsvInputError(`${path} row 1: no column named "${options.timeColumn}" for --time-column (columns: ${header.join(', ')})`);
    timeColumn = { name: options.timeColumn, index, kind: numeric[index]! >= dates[index]! ? 'seconds' : 'date' };
  } else {
    const index = header.findIndex((name) => TIME_NAMES.test(name));
    if (index >= 0 && (numeric[index]! > 0 || dates[index]! > 0)) {
      timeColumn = { name: header[index] as string, index, kind: numeric[index]! >= dates[index]! ? 'seconds' : 'date' };
    }
  }
  const channels: CsvChannelColumn[] = [];
  const ignored: string[] = [];
  header.forEach((name, index) => {
    if (timeColumn && index === timeColumn.index) return;
    if (filled[index]! > 0 && numeric[index]! * 2 > filled[index]!) channels.push({ name, index, issues: new Map() });
    else ignored.push(name);
  });
  if (channels.length === 0) {
    throw new CsvInputError(`${path}: no numeric column found (columns: ${header.join(', ')})`);
  }
  return { path, delimiter, header, channels, timeColumn, ignored, decimalComma };
}

async function firstLine(path: string): Promise<string | null> {
  const stream = createReadStream(path, { encoding: 'utf8', highWaterMark: 1 << 16 });
  let text = '';
  for await (const chunk of stream as AsyncIterable<string>) {
    text += chunk;
    const end = text.indexOf('\n');
    if (end >= 0) {
      stream.destroy();
      text = text.slice(0, end);
      break;
    }
  }
  if (text.charCodeAt(0) === 0xfeff) text = text.slice(1);
  if (text.endsWith('\r')) text = text.slice(0, -1);
  return text.length > 0 ? text : null;
}

/**
 * Reads the data rows and calls `onRow(line, timeSeconds, values)` for each, synchronously within
 * each chunk of the file. `values[c]` is the channel's number, or NaN when its cell was rejected
 * (the rejection is recorded in the channel's issues; NaN never leaves this loop as a value: the
 * caller skips it). `values` is reused between rows. `timeSeconds` is NaN when the file has no time
 * column or the cell is unusable (then `onTimeIssue` hears of it).
 */
export async function forEachCsvRow(
  layout: CsvLayout,
  onRow: (line: number, timeSeconds: number, values: Float64Array) => void,
  onTimeIssue: (line: number, text: string) => void,
): Promise<number> {
  const { channels, timeColumn, delimiter, path } = layout;
  const parseCell = layout.decimalComma ? parseCommaMeasurement : parseMeasurement;
  const values = new Float64Array(channels.length);
  // Role of each column: a channel's index, TIME, or UNUSED.
  const columnRole = new Int32Array(layout.header.length).fill(UNUSED);
  channels.forEach((column, c) => (columnRole[column.index] = c));
  if (timeColumn) columnRole[timeColumn.index] = TIME;
  const markMissing = (col: number, line: number) => {
    const role = columnRole[col] as number;
    if (role >= 0) {
      values[role] = Number.NaN;
      noteIssue(channels[role] as CsvChannelColumn, 'missing', line);
    }
  };
  const readTime = (fields: string[], line: number): number => {
    if (!timeColumn) return Number.NaN;
    const cell = fields[timeColumn.index] ?? '';
    if (timeColumn.kind === 'seconds') {
      const parsed = parseCell(cell);
      if (typeof parsed === 'number') return parsed;
    } else {
      const ms = Date.parse(cell.trim());
      if (!Number.isNaN(ms)) return ms / 1000;
    }
    onTimeIssue(line, cell);
    return Number.NaN;
  };
  let rows = 0;
  for await (const batch of readLineBatches(path)) {
    const lines = batch.lines;
    for (let b = 0; b < lines.length; b++) {
      const line = batch.firstLine + b;
      if (line === 1) continue;
      const text = lines[b] as string;
      if (text.length === 0 || text.trim() === '') continue; // blank line
      let time = Number.NaN;
      if (text.indexOf('"') < 0) {
        // Fast path: walk the fields in place, parse only the columns in use.
        let start = 0;
        for (let col = 0; col < columnRole.length; col++) {
          let end = text.indexOf(delimiter, start);
          if (end < 0) end = text.length;
          const role = columnRole[col] as number;
          if (role !== UNUSED) {
            let value = parseDecimalSpan(text, start, end);
            let problem: ValueProblem | null = null;
            if (value !== value) {
              const parsed = parseCell(text.slice(start, end));
              if (typeof parsed === 'number') value = parsed;
              else problem = parsed;
            }
            if (role === TIME) {
              if (problem === null) time = value;
              else if (timeColumn?.kind === 'date') {
                const ms = Date.parse(text.slice(start, end).trim());
                if (Number.isNaN(ms)) onTimeIssue(line, text.slice(start, end));
                else time = ms / 1000;
              } else onTimeIssue(line, text.slice(start, end));
            } else if (problem === null) values[role] = value;
            else {
              values[role] = Number.NaN;
              noteIssue(channels[role] as CsvChannelColumn, problem, line);
            }
          }
          if (end === text.length) {
            for (let rest = col + 1; rest < columnRole.length; rest++) markMissing(rest, line);
            break;
          }
          start = end + 1;
        }
      } else {
        const fields = splitFields(text, delimiter);
        time = readTime(fields, line);
        for (let c = 0; c < channels.length; c++) {
          const column = channels[c] as CsvChannelColumn;
          const cell = fields[column.index];
          if (cell === undefined) {
            values[c] = Number.NaN;
            noteIssue(column, 'missing', line);
            continue;
          }
          const parsed = parseCell(cell);
          if (typeof parsed === 'number') values[c] = parsed;
          else {
            values[c] = Number.NaN;
            noteIssue(column, parsed, line);
          }
        }
      }
      rows++;
      onRow(line, time, values);
    }
  }
  return rows;
}

const UNUSED = -1;
const TIME = -2;

function noteIssue(column: CsvChannelColumn, problem: ValueProblem | 'missing', line: number): void {
  let issue = column.issues.get(problem);
  if (!issue) {
    issue = { problem, count: 0, firstRows: [] };
    column.issues.set(problem, issue);
  }
  issue.count++;
  if (issue.firstRows.length < 3) issue.firstRows.push(line);
}

/** One line per kind of rejected cell: "file row 12, column "T_in": empty cell (skipped; 3 in all, first at rows 12, 40, 41)". */
export function describeIssues(path: string, column: CsvChannelColumn): string[] {
  const lines: string[] = [];
  for (const issue of column.issues.values()) {
    const what = issue.problem === 'missing' ? 'row has no cell for this column' : PROBLEM_TEXT[issue.problem];
    const first = issue.firstRows[0];
    const more = issue.count > 1 ? ` (${issue.count} cells in all, rows ${issue.firstRows.join(', ')}${issue.count > issue.firstRows.length ? ', ...' : ''})` : '';
    lines.push(`${path} row ${first}, column "${column.name}": ${what}, skipped${more}`);
  }
  return lines;
}
