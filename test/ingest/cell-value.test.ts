import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { parseDecimalSpan, parseMeasurement } from '../../src/ingest/cell-value.js';

describe('parseMeasurement', () => {
  it('accepts decimal and exponent notation, rejects everything else with its reason', () => {
    expect(parseMeasurement('21.375')).toBe(21.375);
    expect(parseMeasurement(' -4.5e-3 ')).toBe(-0.0045);
    expect(parseMeasurement('+.5')).toBe(0.5);
    expect(parseMeasurement('0')).toBe(0);
    expect(parseMeasurement('')).toBe('empty');
    expect(parseMeasurement('   ')).toBe('empty');
    expect(parseMeasurement('warm')).toBe('not-a-number');
    expect(parseMeasurement('0x1A')).toBe('not-a-number');
    expect(parseMeasurement('0b101')).toBe('not-a-number');
    expect(parseMeasurement('1,5')).toBe('not-a-number');
    expect(parseMeasurement('NaN')).toBe('nan');
    expect(parseMeasurement('-nan')).toBe('nan');
    expect(parseMeasurement('Infinity')).toBe('infinite');
    expect(parseMeasurement('-inf')).toBe('infinite');
    expect(parseMeasurement('1e400')).toBe('infinite');
  });
});

describe('parseDecimalSpan (fast path)', () => {
  it('gives the same double as Number() for every plain decimal it accepts (Clinger fast path)', () => {
    fc.assert(
      fc.property(fc.double({ min: -1e9, max: 1e9, noNaN: true }), fc.integer({ min: 0, max: 9 }), (value, decimals) => {
        const text = value.toFixed(decimals);
        const parsed = parseDecimalSpan(text, 0, text.length);
        if (!Number.isNaN(parsed)) expect(Object.is(parsed, Number(text)) || parsed === Number(text)).toBe(true);
      }),
      { numRuns: 20000 },
    );
  });

  it('reads a span inside a line without a substring, and refuses what it cannot read exactly', () => {
    const line = '12.5,-0.75,abc,,1e3,.,-,0.1234567890123456789';
    const spans: [number, number][] = [];
    let start = 0;
    for (;;) {
      const end = line.indexOf(',', start);
      spans.push([start, end < 0 ? line.length : end]);
      if (end < 0) break;
      start = end + 1;
    }
    const got = spans.map(([a, b]) => parseDecimalSpan(line, a, b));
    expect(got[0]).toBe(12.5);
    expect(got[1]).toBe(-0.75);
    for (const i of [2, 3, 4, 5, 6, 7]) expect(Number.isNaN(got[i])).toBe(true); // word, empty, exponent, lone dot, lone sign, >15 digits
  });
});

describe('parseCommaMeasurement: numbers with a decimal comma', () => {
  it('reads "21,375", signs, exponents and blanks; a point as written; both, or two commas, are not numbers', async () => {
    const { parseCommaMeasurement } = await import('../../src/ingest/cell-value.js');
    expect(parseCommaMeasurement('21,375')).toBe(21.375);
    expect(parseCommaMeasurement(' -1,5e-3 ')).toBe(-0.0015);
    expect(parseCommaMeasurement(',5')).toBe(0.5);
    expect(parseCommaMeasurement('12')).toBe(12);
    expect(parseCommaMeasurement('1.234')).toBe(1.234);
    expect(parseCommaMeasurement('1.234,5')).toBe('not-a-number');
    expect(parseCommaMeasurement('1,2,3')).toBe('not-a-number');
    expect(parseCommaMeasurement('NaN')).toBe('nan');
    expect(parseCommaMeasurement('')).toBe('empty');
  });
});
