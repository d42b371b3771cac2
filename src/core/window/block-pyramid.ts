import { expectRecord, type StateRecord } from '../state/record.js';
/**
 * Multi-resolution block pyramid: the sums of aligned blocks of 2, 4, 8, ... samples of a window.
 *
 * Level j holds the blocks of size 2^j that lie wholly inside the window, aligned to the absolute
 * sample index (block q of level j covers samples q*2^j .. (q+1)*2^j - 1), so that a sliding window
 * keeps its blocks when it moves and only drops those that fall off the front. For every level it
 * maintains the count of blocks, the sum of block sums, the sum of their squares and the sum of
 * products of neighbouring blocks, from which follow in O(1) per level:
 *   - batch means / blocking estimates of the variance of the mean (H. Flyvbjerg & H. G. Petersen
 *     (1989), "Error estimates on averages of correlated data", J. Chem. Phys. 91, 461-466);
 *   - the lag-one autocovariance of block means that the automatic choice of M. Jonsson (2018),
 *     "Standard error estimation by an automated blocking method", Phys. Rev. E 98, 043304, needs;
 *   - the non-overlapping Allan variance at averaging factor 2^j (D. W. Allan (1966), Proc. IEEE
 *     54(2), 221-230; W. J. Riley (2008), NIST SP 1065, section 5.2.2).
 *
 * Values enter already shifted by the window's anchor (see ShiftedMoments).
 * Cost: amortised O(1) per sample (level j is touched every 2^j samples); O(levels) to drop the
 *   front of a sliding window in the worst case, usually O(1).
 * Memory: about one Float64 per windowed sample in all (W/2 + W/4 + ... blocks).
 */
export interface PyramidLevelStats {
  /** Samples per block, 2^level. */
  blockSize: number;
  /** Complete blocks in the window. */
  count: number;
  /** Mean of the block means (shifted). */
  mean: number;
  /** Variance of the block means with divisor count (biased). */
  biasedVariance: number;
  /** Lag-one autocovariance of the block means with divisor count (biased). */
  lagOneAutocovariance: number;
  /** Sum of squared differences of successive block means. */
  successiveDifferenceSquares: number;
}

export interface PyramidLevelState {
  sums: Float64Array;
  frontBlock: number;
  total: number;
  totalSquares: number;
  neighbourProducts: number;
  carrySum: number;
  carryBlock: number;
}

export interface BlockPyramidState extends StateRecord<'block-pyramid', 1> {
  levels: (PyramidLevelState | null)[];
  rawCarry: number;
  rawCarryIndex: number;
  windowStart: number;
}

class PyramidLevel {
  readonly level: number;
  readonly blockSize: number;
  private sums: Float64Array;
  private head = 0;
  count = 0;
  private readonly maxBlocks: number;
  /** Absolute block index of the front block. */
  frontBlock = 0;
  total = 0;
  totalSquares = 0;
  neighbourProducts = 0;
  /** Sum of a first-of-pair block waiting for its partner, and its block index (-1 if none). */
  carrySum = 0;
  carryBlock = -1;
  /** The newest block's sum (saves a ring lookup per push). */
  private lastSum = 0;

  constructor(level: number, initialBlocks: number, maxBlocks: number) {
    this.level = level;
    this.blockSize = 2 ** level;
    this.maxBlocks = maxBlocks;
    this.sums = new Float64Array(Math.max(2, Math.min(initialBlocks, maxBlocks)));
  }

  at(i: number): number {
    let slot = this.head + i;
    if (slot >= this.sums.length) slot -= this.sums.length;
    return this.sums[slot] as number;
  }

  push(block: number, sum: number): void {
    const count = this.count;
    if (count === 0) this.frontBlock = block;
    else this.neighbourProducts += this.lastSum * sum;
    const sums = count === this.sums.length ? this.grow() : this.sums;
    let slot = this.head + count;
    if (slot >= sums.length) slot -= sums.length;
    sums[slot] = sum;
    this.lastSum = sum;
    this.count = count + 1;
    this.total += sum;
    this.totalSquares += sum * sum;
  }

  shift(): void {
    const leaving = this.sums[this.head] as number;
    if (this.count > 1) this.neighbourProducts -= leaving * this.at(1);
    this.total -= leaving;
    this.totalSquares -= leaving * leaving;
    this.head++;
    if (this.head === this.sums.length) this.head = 0;
    this.count--;
    this.frontBlock++;
    if (this.count === 0) {
      this.total = 0;
      this.totalSquares = 0;
      this.neighbourProducts = 0;
    }
  }

  clear(): void {
    this.head = 0;
    this.count = 0;
    this.total = 0;
    this.totalSquares = 0;
    this.neighbourProducts = 0;
    this.carryBlock = -1;
    this.carrySum = 0;
  }

  private grow(): Float64Array {
    const size = this.sums.length;
    const next = Math.min(this.maxBlocks, size * 2);
    if (next <= size) throw new RangeError(`pyramid level ${this.level} is full`);
    const grown = new Float64Array(next);
    for (let i = 0; i < this.count; i++) grown[i] = this.at(i);
    this.sums = grown;
    this.head = 0;
    return grown;
  }

  saveState(): PyramidLevelState {
    const sums = new Float64Array(this.count);
    for (let i = 0; i < this.count; i++) sums[i] = this.at(i);
    return { sums, frontBlock: this.frontBlock, total: this.total, totalSquares: this.totalSquares, neighbourProducts: this.neighbourProducts, carrySum: this.carrySum, carryBlock: this.carryBlock };
  }

  loadState(state: PyramidLevelState): void {
    const count = state.sums.length;
    if (count > this.sums.length) this.sums = new Float64Array(Math.min(this.maxBlocks, Math.max(count, 2)));
    this.sums.set(state.sums);
    this.head = 0;
    this.count = count;
    ({ frontBlock: this.frontBlock, total: this.total, totalSquares: this.totalSquares, neighbourProducts: this.neighbourProducts, carrySum: this.carrySum, carryBlock: this.carryBlock } = state);
    this.lastSum = count > 0 ? (state.sums[count - 1] as number) : 0;
  }

  get byteLength(): number {
    return this.sums.byteLength;
  }
}

export class BlockPyramid {
  private readonly levels: PyramidLevel[] = [];
  private readonly maxLevel: number;
  private readonly maxSamples: number;
  private readonly preallocate: boolean;
  private rawCarry = 0;
  private rawCarryIndex = -1;
  private windowStart = 0;

  /**
   * @param maxSamples the window's largest size; levels go up to the largest 2^j <= maxSamples / 2
   *   so that every level can hold at least two blocks.
   * @param preallocate allocate each level's full ring at once (sliding windows of fixed size).
   */
  constructor(maxSamples: number, preallocate: boolean) {
    if (!Number.isInteger(maxSamples) || maxSamples < 4) throw new RangeError('block pyramid requires maxSamples of at least 4');
    this.maxSamples = maxSamples;
    this.maxLevel = Math.max(1, Math.floor(Math.log2(maxSamples / 2)));
    this.preallocate = preallocate;
  }


  /** Adds the sample with absolute index `index` (shifted value). */
  add(index: number, shifted: number): void {
    if (index % 2 === 0) {
      this.rawCarry = shifted;
      this.rawCarryIndex = index;
    } else if (this.rawCarryIndex === index - 1 && index - 1 >= this.windowStart) {
      this.emit(1, (index - 1) / 2, this.rawCarry + shifted);
    }
  }

  /** Drops every block that starts before `start` (the window's new first absolute index). */
  dropBefore(start: number): void {
    this.windowStart = start;
    for (const level of this.levels) {
      let dropped = false;
      while (level.count > 0 && level.frontBlock * level.blockSize < start) {
        level.shift();
        dropped = true;
      }
      if (level.carryBlock >= 0 && level.carryBlock * level.blockSize < start) level.carryBlock = -1;
      if (!dropped && (level.count > 0 || level.carryBlock >= 0)) break;
    }
    if (this.rawCarryIndex >= 0 && this.rawCarryIndex < start) this.rawCarryIndex = -1;
  }

  /** Empties the pyramid; the next sample must be added with its absolute index. */
  reset(windowStart: number): void {
    for (const level of this.levels) level.clear();
    this.rawCarryIndex = -1;
    this.windowStart = windowStart;
  }

  /** Statistics of level j >= 1, or null if it holds no block. Cost O(1). */
  stats(j: number): PyramidLevelStats | null {
    const level = this.levels[j - 1];
    if (!level || level.count === 0) return null;
    const k = level.count;
    const b = level.blockSize;
    const total = level.total / b;
    const mean = total / k;
    const squares = level.totalSquares / (b * b);
    const biasedVariance = Math.max(0, squares / k - mean * mean);
    const first = level.at(0) / b;
    const last = level.at(k - 1) / b;
    const products = level.neighbourProducts / (b * b);
    // sum_{i<k-1} (m_i - mean)(m_{i+1} - mean) = P - mean * (2 * total - first - last) + (k - 1) * mean^2
    const lagOne = k > 1 ? (products - mean * (2 * total - first - last) + (k - 1) * mean * mean) / k : 0;
    const successive = k > 1 ? Math.max(0, 2 * squares - first * first - last * last - 2 * products) : 0;
    return { blockSize: b, count: k, mean, biasedVariance, lagOneAutocovariance: lagOne, successiveDifferenceSquares: successive };
  }

  /** Block means (shifted) of level j, oldest first. Cost O(blocks). */
  blockMeans(j: number): Float64Array {
    const level = this.levels[j - 1];
    if (!level) return new Float64Array(0);
    const out = new Float64Array(level.count);
    for (let i = 0; i < level.count; i++) out[i] = level.at(i) / level.blockSize;
    return out;
  }

  /** Absolute index of the first sample of level j's front block. */
  frontStart(j: number): number {
    const level = this.levels[j - 1];
    return level && level.count > 0 ? level.frontBlock * level.blockSize : this.windowStart;
  }

  get byteLength(): number {
    let bytes = 0;
    for (const level of this.levels) bytes += level.byteLength;
    return bytes;
  }

  saveState(): BlockPyramidState {
    const levels: (PyramidLevelState | null)[] = [];
    for (let i = 0; i < this.levels.length; i++) levels.push(this.levels[i] ? (this.levels[i] as PyramidLevel).saveState() : null);
    return { record: 'block-pyramid', version: 1, levels, rawCarry: this.rawCarry, rawCarryIndex: this.rawCarryIndex, windowStart: this.windowStart };
  }

  loadState(state: BlockPyramidState): void {
    expectRecord(state, 'block-pyramid', 1);
    this.levels.length = 0;
    state.levels.forEach((levelState, i) => {
      if (!levelState) return;
      const level = this.createLevel(i + 1, levelState.sums.length);
      level.loadState(levelState);
      this.levels[i] = level;
    });
    ({ rawCarry: this.rawCarry, rawCarryIndex: this.rawCarryIndex, windowStart: this.windowStart } = state);
  }

  private createLevel(j: number, atLeast: number): PyramidLevel {
    // The window never holds more than maxSamples samples when a block is added (the oldest leaves
    // first), so no more than floor(maxSamples / 2^j) aligned blocks fit in it.
    const maxBlocks = Math.max(2, Math.floor(this.maxSamples / 2 ** j));
    return new PyramidLevel(j, this.preallocate ? maxBlocks : Math.max(16, atLeast), maxBlocks);
  }

  private emit(first: number, firstBlock: number, firstSum: number): void {
    let j = first;
    let block = firstBlock;
    let sum = firstSum;
    for (;;) {
      let level = this.levels[j - 1];
      if (!level) {
        level = this.createLevel(j, 16);
        this.levels[j - 1] = level;
      }
      level.push(block, sum);
      if (j >= this.maxLevel) return;
      if (block % 2 === 0) {
        level.carrySum = sum;
        level.carryBlock = block;
        return;
      }
      if (level.carryBlock !== block - 1) return;
      level.carryBlock = -1;
      sum += level.carrySum;
      block = (block - 1) / 2;
      j++;
    }
  }
}
