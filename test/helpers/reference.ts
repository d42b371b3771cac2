import { existsSync, readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { dirname, join } from 'node:path';

const here = dirname(fileURLToPath(import.meta.url));
/** The project root. */
export const ROOT = join(here, '..', '..');
/** ../shared/reference beside the checkout, when present. */
export const SHARED_REFERENCE = join(ROOT, '..', 'shared', 'reference');

export function sharedReferenceAvailable(): boolean {
  return existsSync(join(SHARED_REFERENCE, 'reference-values.json'));
}

export function readSharedJson<T>(name: string): T {
  return JSON.parse(readFileSync(join(SHARED_REFERENCE, name), 'utf8')) as T;
}

export function readFixture<T>(name: string): T {
  return JSON.parse(readFileSync(join(ROOT, 'test', 'fixtures', 'reference', name), 'utf8')) as T;
}

/** Significant digits to which `actual` agrees with `expected` (capped at 17). */
export function digitsAgreeing(actual: number, expected: number): number {
  if (actual === expected) return 17;
  const rel = Math.abs(actual - expected) / Math.max(Math.abs(expected), Number.MIN_VALUE);
  return Math.min(17, -Math.log10(rel));
}

/** Largest |a - b| over the elements, relative to the largest |b| (matrices and vectors as flat arrays). */
export function relativeDifference(actual: ArrayLike<number>, expected: ArrayLike<number>): number {
  let scale = 0;
  let worst = 0;
  for (let i = 0; i < expected.length; i++) {
    scale = Math.max(scale, Math.abs(expected[i] as number));
    worst = Math.max(worst, Math.abs((actual[i] as number) - (expected[i] as number)));
  }
  return worst / scale;
}
