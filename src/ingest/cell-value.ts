import { MAX_MAGNITUDE } from './sample.js';

/** Why a cell or payload value is not a measurement. */
export type ValueProblem = 'empty' | 'not-a-number' | 'nan' | 'infinite' | 'out-of-range';

/**
 * Parses one measurement from text. Accepts decimal and exponent notation with surrounding blanks;
 * rejects empty text, words, hexadecimal and the spellings of NaN and infinity, so that nothing
 * but a finite number ever reaches a statistic.
 */
export function parseMeasurement(text: string): number | ValueProblem {
  // Fast path: Number() accepts exactly the decimal forms we want, plus the empty string (0),
  // hexadecimal, binary and octal literals and the spellings of infinity; those are caught here.
  const value = Number(text);
  if (Number.isFinite(value)) {
    const first = text.charCodeAt(0);
    if (first === 48 /* 0 */ && text.length > 2) {
      const second = text.charCodeAt(1) | 32;
      if (second === 120 || second === 98 || second === 111) return 'not-a-number'; // 0x 0b 0o
    }
    if (value === 0 || first <= 32) return classifySlow(text);
    return Math.abs(value) <= MAX_MAGNITUDE ? value : 'out-of-range';
  }
  return classifySlow(text);
}

function classifySlow(text: string): number | ValueProblem {
  const trimmed = text.trim();
  if (trimmed === '') return 'empty';
  const value = Number(trimmed);
  if (Number.isNaN(value)) {
    if (/^[+-]?nan$/i.test(trimmed)) return 'nan';
    return /^[+-]?inf(inity)?$/i.test(trimmed) ? 'infinite' : 'not-a-number';
  }
  if (!Number.isFinite(value)) return 'infinite';
  if (!NUMBER_PATTERN.test(trimmed)) return 'not-a-number';
  return Math.abs(value) <= MAX_MAGNITUDE ? value : 'out-of-range';
}

const NUMBER_PATTERN = /^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/;

export const PROBLEM_TEXT: Record<ValueProblem, string> = {
  empty: 'empty cell',
  'not-a-number': 'not a number',
  nan: 'NaN is not a measurement',
  infinite: 'Infinity is not a measurement',
  'out-of-range': `beyond +/-${MAX_MAGNITUDE}, outside any measurement`,
};

const POWERS_OF_TEN = [1, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22];

/**
 * Parses a plain decimal number (optional sign, digits, optional fraction; no exponent, no blanks)
 * from text[start, end) without making a substring, or returns NaN when the text is anything else,
 * so the caller can fall back to `parseMeasurement` on the substring.
 * Exact: with at most 15 significant digits the mantissa is an exact integer and 10^k (k <= 22) an
 * exact double, so one correctly rounded division gives the same double as Number() (W. D. Clinger
 * (1990), "How to read floating point numbers accurately", PLDI '90, 92-101: the fast path).
 * About three times faster than split + Number() on logged files (bench/precision.js, analyze).
 */
export function parseDecimalSpan(text: string, start: number, end: number): number {
  let i = start;
  let negative = false;
  let c = text.charCodeAt(i);
  if (c === 45) {
    negative = true;
    i++;
  } else if (c === 43) i++;
  let mantissa = 0;
  let significant = 0;
  let fraction = 0;
  let dot = false;
  let sawDigit = false;
  for (; i < end; i++) {
    c = text.charCodeAt(i);
    if (c >= 48 && c <= 57) {
      mantissa = mantissa * 10 + (c - 48);
      sawDigit = true;
      if (mantissa !== 0) significant++;
      if (dot) fraction++;
    } else if (c === 46 && !dot) dot = true;
    else return Number.NaN;
  }
  if (!sawDigit || significant > 15 || fraction > 22) return Number.NaN;
  const value = fraction === 0 ? mantissa : mantissa / (POWERS_OF_TEN[fraction] as number);
  return negative ? -value : value;
}

const DECIMAL_COMMA = /^\s*[+-]?(\d+,\d*|,\d+)([eE][+-]?\d+)?\s*$/;

/**
 * Parses a measurement written with a decimal comma ("21,375", "-1,5e-3"), as loggers set to many
 * European locales write them (with ";" or tab between fields). A cell with a point is read as
 * written (a point is never taken as a thousands separator: "1.234" stays 1.234); a cell with both a
 * comma and a point is not a number.
 */
export function parseCommaMeasurement(text: string): number | ValueProblem {
  if (text.indexOf(',') < 0) return parseMeasurement(text);
  if (!DECIMAL_COMMA.test(text)) return 'not-a-number';
  return parseMeasurement(text.replace(',', '.'));
}

/** Whether a cell is a number only when read with a decimal comma. */
export function isCommaDecimal(text: string): boolean {
  return DECIMAL_COMMA.test(text);
}
