/** Why a cell or payload value is not a measurement. */
export type ValueProblem = 'empty' | 'not-a-number' | 'nan' | 'infinite';

/**
 * Parses one measurement from text. Accepts decimal and exponent notation with surrounding blanks;
 * rejects empty text, words, hexadecimal and the spellings of NaN and infinity, so that nothing
 * but a finite number ever reaches a statistic.
 */
export function parseMeasurement(text: string): number | ValueProblem {
  const trimmed = text.trim();
  if (trimmed === '') return 'empty';
  const value = Number(trimmed);
  if (Number.isNaN(value)) {
    if (/^[+-]?nan$/i.test(trimmed)) return 'nan';
    return /^[+-]?inf(inity)?$/i.test(trimmed) ? 'infinite' : 'not-a-number';
  }
  if (!Number.isFinite(value)) return 'infinite';
  if (!NUMBER_PATTERN.test(trimmed)) return 'not-a-number';
  return value;
}

const NUMBER_PATTERN = /^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/;

export const PROBLEM_TEXT: Record<ValueProblem, string> = {
  empty: 'empty cell',
  'not-a-number': 'not a number',
  nan: 'NaN is not a measurement',
  infinite: 'Infinity is not a measurement',
};
