import { describe, expect, it } from 'vitest';
import { PendingBatch } from '../../src/daemon/pending-batch.js';

// The pending batch keeps samples in typed arrays and hands the store views of them: what the store
// gets must be exactly the samples added since the last successful commit, across growth, a failed
// attempt (the batch kept whole and added to) and the arrays' reuse after a commit.

function unstampedOffsets(bits: Uint8Array | null, n: number): number[] {
  const out: number[] = [];
  for (let i = 0; i < n; i++) if (bits !== null && ((bits[i >> 3] as number) & (1 << (i & 7))) !== 0) out.push(i);
  return out;
}

describe('PendingBatch', () => {
  it('gives the samples added since the last commit, in order, with the unstamped ones marked, across growth and reuse', () => {
    const batch = new PendingBatch();
    let seq = 0;
    for (let round = 0; round < 4; round++) {
      // 70 000 samples in the first round: the arrays grow past the size kept after a commit.
      const n = round === 0 ? 70_000 : 100 + round * 37;
      const first = seq;
      for (let i = 0; i < n; i++) {
        batch.addSample('a', seq, 1000 + seq, seq * 0.5, seq % 7 !== 3);
        if (i % 2 === 0) batch.addSample(`b${round % 2}`, seq / 2, 2000 + seq, -seq, true);
        seq++;
      }
      // A failed attempt: the batch stays whole, more samples join it, the next attempt has both.
      const failed = batch.toCommitBatch({});
      expect(failed.chunks.find((c) => c.channel === 'a')?.values.length).toBe(n);
      batch.addSample('a', seq, 1000 + seq, seq * 0.5, false);
      seq++;
      const committed = batch.toCommitBatch({});
      const a = committed.chunks.find((c) => c.channel === 'a');
      expect(a?.firstSeq).toBe(first);
      expect(a?.values.length).toBe(n + 1);
      expect(Array.from(a?.values ?? []).every((v, i) => v === (first + i) * 0.5)).toBe(true);
      expect(Array.from(a?.times ?? []).every((t, i) => t === 1000 + first + i)).toBe(true);
      const expectedUnstamped: number[] = [];
      for (let i = 0; i < n; i++) if ((first + i) % 7 === 3) expectedUnstamped.push(i);
      expectedUnstamped.push(n);
      expect(unstampedOffsets(a?.unstamped ?? null, n + 1)).toEqual(expectedUnstamped);
      const b = committed.chunks.find((c) => c.channel === `b${round % 2}`);
      expect(b?.values.length).toBe(Math.ceil(n / 2));
      expect(b?.unstamped).toBeNull();
      expect(batch.sampleCount).toBe(n + 1 + Math.ceil(n / 2));
      batch.clear();
      expect(batch.sampleCount).toBe(0);
      expect(batch.toCommitBatch({}).chunks).toEqual([]);
    }
  });

  it('refuses a sample that does not follow the channel’s last one', () => {
    const batch = new PendingBatch();
    batch.addSample('a', 5, 1, 1, true);
    expect(() => batch.addSample('a', 7, 2, 2, true)).toThrow(/sample 7 does not follow sample 5/);
    batch.clear();
    // After a commit the channel's next chunk may start anywhere (the channel numbers its samples).
    batch.addSample('a', 6, 3, 3, true);
    expect(batch.toCommitBatch({}).chunks[0]?.firstSeq).toBe(6);
  });
});
