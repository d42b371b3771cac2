import { describe, expect, it } from 'vitest';
import { ChannelPipeline } from '../../src/engine/channel-pipeline.js';
import { DEFAULT_CHANNEL_OPTIONS } from '../../src/engine/channel-options.js';
import { digitsAgreeing } from '../helpers/reference.js';
import { GENERATED as generated, FROM_SHARED as fromShared, HAVE_SHARED_NIST as haveShared } from '../helpers/nist-strd.js';

// NIST StRD univariate summary statistics (certified values and data: test/helpers/nist-strd.ts).

// The detectors are off: NumAcc2-4 alternate deterministically (r(1) = -0.999), which no
// stationarity test treats as noise, and this test is about the accuracy of the streamed sums.
function streamGrowing(values: number[]) {
  const pipeline = new ChannelPipeline('nist', { ...DEFAULT_CHANNEL_OPTIONS, detectors: false });
  values.forEach((v, i) => pipeline.push(v, i));
  return pipeline.snapshot();
}

/** A sliding window of exactly n samples that first carried 3n other values, so every sample of the
 * data set entered after removals and an exact rebuild had happened. */
function streamSliding(values: number[]) {
  const n = values.length;
  const pipeline = new ChannelPipeline('nist', { ...DEFAULT_CHANNEL_OPTIONS, detectors: false, window: { kind: 'sliding', samples: Math.max(n, 4), maxSamples: Math.max(n, 4) } });
  for (let i = 0; i < 3 * n; i++) pipeline.push((values[i % n] as number) * 1.5 + 1000, i);
  values.forEach((v, i) => pipeline.push(v, 3 * n + i));
  return pipeline.snapshot();
}

describe('NIST StRD univariate summary statistics through the streaming engine', () => {
  if (!haveShared) {
    it.skip('PiDigits, Lottery, Lew, Mavro, Michelso: skipped because ../shared/reference/nist-strd is absent', () => {});
  }
  for (const data of [...generated, ...fromShared]) {
    for (const [label, stream] of [['growing', streamGrowing], ['sliding', streamSliding]] as const) {
      it(`${data.name} (${label} window): mean, s and r(1) to the certified values`, () => {
        if (label === 'sliding' && data.values.length < 4) return; // a window needs 4 slots; NumAcc1 has 3 values
        const s = stream(data.values);
        const digits = {
          mean: digitsAgreeing(s.mean as number, data.mean),
          sd: digitsAgreeing(s.sd as number, data.sd),
          r1: digitsAgreeing(s.acf[0] as number, data.r1),
        };
        console.log(`NIST StRD ${data.name} ${label}: digits agreeing mean ${digits.mean.toFixed(1)}, s ${digits.sd.toFixed(1)}, r(1) ${digits.r1.toFixed(1)}`);
        expect(s.n).toBe(data.values.length);
        expect(digits.mean).toBeGreaterThanOrEqual(data.minDigits.mean);
        expect(digits.sd).toBeGreaterThanOrEqual(data.minDigits.sd);
        expect(digits.r1).toBeGreaterThanOrEqual(data.minDigits.r1);
      });
    }
  }
});
