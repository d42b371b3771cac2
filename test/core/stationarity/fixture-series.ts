import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { ROOT, readFixture } from '../../helpers/reference.js';

/** Reads a committed input series (test/fixtures/reference/<file>, a header line then one value a line). */
export function readSeries(file: string): Float64Array {
  const text = readFileSync(join(ROOT, 'test', 'fixtures', 'reference', file), 'utf8');
  const lines = text.split('\n').slice(1).filter((line) => line.trim() !== '');
  return Float64Array.from(lines, Number);
}

/** Relative difference |a - b| / max(|b|, floor); the floor keeps values near 0 from dominating. */
export function relativeDifference(actual: number, expected: number, floor = 1e-300): number {
  return Math.abs(actual - expected) / Math.max(Math.abs(expected), floor);
}

export interface CodaSpectrum {
  spectrum: number;
  order: number;
  arOrder: number;
  orderMax: number;
  varPred: number;
  coefficients: number[];
}

export interface CodaHeidel {
  eps: number;
  pvalue: number;
  stest?: number;
  start?: number | null;
  pvalueOut?: number | null;
  htest?: number | null;
  mean?: number | null;
  halfwidth?: number | null;
  secondHalfSpectrum?: number;
  error?: string;
}

export interface CodaGewekeWindow {
  startTime: number;
  endTime: number;
  n: number;
  mean: number;
  spectrum: number;
  order: number;
}

export interface CodaGeweke {
  frac1: number;
  frac2: number;
  z?: number | null;
  first?: CodaGewekeWindow;
  last?: CodaGewekeWindow;
  error?: string;
}

export interface CodaSeries {
  name: string;
  file: string;
  n: number;
  spectrum0: CodaSpectrum;
  heidel: CodaHeidel[];
  geweke: CodaGeweke[];
}

export interface CodaFixture {
  source: { tool: string; version: Record<string, string>; call: string; script: string };
  tolerance: { relative: number };
  pcramer: { q: number[]; cdf: number[] };
  series: CodaSeries[];
}

export function readCodaFixture(): CodaFixture {
  return readFixture<CodaFixture>('coda-stationarity.json');
}
