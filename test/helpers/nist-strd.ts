import { existsSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { SHARED_REFERENCE } from './reference.js';

// NIST Statistical Reference Datasets, Univariate Summary Statistics: certified mean, standard
// deviation (divisor n - 1) and lag-1 autocorrelation r(1) = sum (y_i - m)(y_(i-1) - m) / sum (y_i - m)^2.
// NumAcc1-4 are regenerated from their published construction; the other five data sets are read
// from ../shared/reference/nist-strd when it is present. Certified values as printed by NIST
// (transcribed in ../shared/reference/REFERENCES.md section 1).

export interface NistDataset {
  name: string;
  values: number[];
  mean: number;
  sd: number;
  r1: number;
  /** Significant digits the streamed statistics must reach. */
  minDigits: { mean: number; sd: number; r1: number };
}

function numAcc(c: number): number[] {
  // c + 0.2 followed by 500 pairs (c + 0.1, c + 0.3): n = 1001 (NIST StRD NumAcc2-4 construction).
  const out = [c + 0.2];
  for (let i = 0; i < 500; i++) out.push(c + 0.1, c + 0.3);
  return out;
}

// Digits reached are bounded by how 10000000.1 and its kin are stored in binary, not by the
// algorithm (REFERENCES.md section 1: even an exact two-pass s on the stored doubles is off by 5.6e-9
// for NumAcc4), so the floors below are what IEEE doubles allow, with half a digit to spare.
export const GENERATED: NistDataset[] = [
  { name: 'NumAcc1', values: [10000001, 10000003, 10000002], mean: 10000002, sd: 1, r1: -0.5, minDigits: { mean: 15, sd: 15, r1: 15 } },
  { name: 'NumAcc2', values: numAcc(1), mean: 1.2, sd: 0.1, r1: -0.999, minDigits: { mean: 14, sd: 12, r1: 12 } },
  { name: 'NumAcc3', values: numAcc(1000000), mean: 1000000.2, sd: 0.1, r1: -0.999, minDigits: { mean: 15, sd: 8.5, r1: 10 } },
  { name: 'NumAcc4', values: numAcc(10000000), mean: 10000000.2, sd: 0.1, r1: -0.999, minDigits: { mean: 15, sd: 7.5, r1: 9.5 } },
];

const CERTIFIED: Record<string, { mean: number; sd: number; r1: number }> = {
  PiDigits: { mean: 4.5348, sd: 2.86733906028871, r1: -0.00355099287237972 },
  Lottery: { mean: 518.95871559633, sd: 291.699727470969, r1: -0.120948622967393 },
  Lew: { mean: -177.435, sd: 277.332168044316, r1: -0.307304800605679 },
  Mavro: { mean: 2.001856, sd: 0.000429123454003053, r1: 0.937989183438248 },
  Michelso: { mean: 299.8524, sd: 0.0790105478190518, r1: 0.535199668621283 },
};

const sharedDir = join(SHARED_REFERENCE, 'nist-strd');
/** Whether ../shared/reference/nist-strd is present (tests skip the five read data sets when not). */
export const HAVE_SHARED_NIST = existsSync(sharedDir);

export const FROM_SHARED: NistDataset[] = HAVE_SHARED_NIST
  ? Object.entries(CERTIFIED).map(([name, c]) => ({
      name,
      values: readFileSync(join(sharedDir, `${name}.txt`), 'utf8').trim().split(/\s+/).map(Number),
      ...c,
      minDigits: { mean: 13, sd: 12, r1: 11 },
    }))
  : [];
