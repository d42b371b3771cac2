/**
 * plateau's binary frame (`format: binary`): many samples of one channel at a fixed interval in one
 * message, little-endian, read without parsing text and without an object per sample.
 *
 * ```
 * offset  size  field
 *      0     4  magic: the bytes "PTF1" (0x50 0x54 0x46 0x31)
 *      4     1  version: 1
 *      5     1  value type: 1 = float64, 2 = float32
 *      6     2  uint16: length L of the channel id in bytes (1..128, UTF-8)
 *      8     4  uint32: count N of values (1..maxSamples)
 *     12     4  uint32: flags, 0 (reserved)
 *     16     8  float64: time stamp of the first value, seconds since 1970-01-01T00:00:00Z
 *     24     8  float64: sample interval, seconds (> 0); value i is at first + i * interval
 *     32     L  channel id (UTF-8), then zero bytes up to the next multiple of 8
 *  32+P    N*w  N values of w = 8 (float64) or 4 (float32) bytes
 * ```
 *
 * P is L rounded up to a multiple of 8, so the values start on an 8-byte boundary of the frame. A
 * frame's length is exactly 32 + P + N w: a shorter one is truncated, a longer one oversized, a
 * value section that is not a whole number of values misaligned, and each is refused whole with a
 * message that says which. A value that is NaN, infinite or beyond +/-1e100 is refused alone; the
 * others are taken.
 */
export const FRAME_MAGIC = 0x31465450; // "PTF1" read as a little-endian uint32
export const FRAME_VERSION = 1;
export const FRAME_HEADER_BYTES = 32;
export const FRAME_FLOAT64 = 1;
export const FRAME_FLOAT32 = 2;
export const FRAME_MAX_ID_BYTES = 128;

export interface FrameHeader {
  channelId: string;
  valueType: typeof FRAME_FLOAT64 | typeof FRAME_FLOAT32;
  count: number;
  /** Seconds since the epoch. */
  firstTime: number;
  /** Seconds. */
  interval: number;
  /** Byte offset of the first value in the frame. */
  valuesOffset: number;
}

export type FrameProblem = { problem: 'truncated' | 'oversized' | 'misaligned' | 'bad-header' | 'too-many-samples' | 'bad-time'; detail: string };

const utf8 = new TextDecoder('utf-8', { fatal: true });

const padded = (length: number) => (length + 7) & ~7;

/** Reads and checks a frame's header against its length; never throws. */
export function readFrameHeader(frame: Uint8Array, maxSamples: number): FrameHeader | FrameProblem {
  if (frame.byteLength < FRAME_HEADER_BYTES) return { problem: 'truncated', detail: `${frame.byteLength} bytes, shorter than the ${FRAME_HEADER_BYTES}-byte header` };
  const view = new DataView(frame.buffer, frame.byteOffset, frame.byteLength);
  if (view.getUint32(0, true) !== FRAME_MAGIC) return { problem: 'bad-header', detail: 'does not start with the frame magic "PTF1"' };
  const version = view.getUint8(4);
  if (version !== FRAME_VERSION) return { problem: 'bad-header', detail: `frame version ${version}, this daemon reads version ${FRAME_VERSION}` };
  const valueType = view.getUint8(5);
  if (valueType !== FRAME_FLOAT64 && valueType !== FRAME_FLOAT32) return { problem: 'bad-header', detail: `value type ${valueType}, expected 1 (float64) or 2 (float32)` };
  const idLength = view.getUint16(6, true);
  if (idLength < 1 || idLength > FRAME_MAX_ID_BYTES) return { problem: 'bad-header', detail: `channel id of ${idLength} bytes, expected 1 to ${FRAME_MAX_ID_BYTES}` };
  const count = view.getUint32(8, true);
  if (count < 1) return { problem: 'bad-header', detail: 'a count of 0 values' };
  if (count > maxSamples) return { problem: 'too-many-samples', detail: `${count} values in one frame, more than the ${maxSamples} allowed` };
  const flags = view.getUint32(12, true);
  if (flags !== 0) return { problem: 'bad-header', detail: `flags ${flags}, expected 0` };
  const firstTime = view.getFloat64(16, true);
  const interval = view.getFloat64(24, true);
  if (!(interval > 0 && interval < 1e9)) return { problem: 'bad-time', detail: `sample interval ${interval} s, expected a positive number of seconds` };
  const lastTime = firstTime + (count - 1) * interval;
  if (!(firstTime >= 0 && lastTime * 1000 < MAX_FRAME_TIME_MS)) return { problem: 'bad-time', detail: `times ${firstTime} s to ${lastTime} s are not plausible times (seconds since 1970)` };
  const valuesOffset = FRAME_HEADER_BYTES + padded(idLength);
  if (frame.byteLength < valuesOffset) return { problem: 'truncated', detail: `${frame.byteLength} bytes, shorter than the header and its ${idLength}-byte channel id` };
  const width = valueType === FRAME_FLOAT64 ? 8 : 4;
  const valueBytes = frame.byteLength - valuesOffset;
  if (valueBytes % width !== 0) return { problem: 'misaligned', detail: `${valueBytes} bytes of values, not a whole number of ${width}-byte values` };
  const present = valueBytes / width;
  if (present < count) return { problem: 'truncated', detail: `${present} of the ${count} values the header declares` };
  if (present > count) return { problem: 'oversized', detail: `${present - count} values beyond the ${count} the header declares` };
  for (let i = FRAME_HEADER_BYTES + idLength; i < valuesOffset; i++) if (frame[i] !== 0) return { problem: 'bad-header', detail: 'padding after the channel id is not zero' };
  let channelId: string;
  try {
    channelId = utf8.decode(frame.subarray(FRAME_HEADER_BYTES, FRAME_HEADER_BYTES + idLength));
  } catch {
    return { problem: 'bad-header', detail: 'channel id is not UTF-8 text' };
  }
  return { channelId, valueType, count, firstTime, interval, valuesOffset };
}

/** Plausible sample times, epoch milliseconds: before 2200 (as the other formats). */
const MAX_FRAME_TIME_MS = 7_258_118_400_000;

/**
 * Copies the frame's values into `into` (at least `header.count` long) as doubles: one pass, no
 * allocation (a typed-array view when the values are 8-byte aligned in memory, else a DataView).
 */
export function readFrameValues(frame: Uint8Array, header: FrameHeader, into: Float64Array): void {
  const start = frame.byteOffset + header.valuesOffset;
  const n = header.count;
  if (header.valueType === FRAME_FLOAT64) {
    if (start % 8 === 0) into.set(new Float64Array(frame.buffer, start, n));
    else {
      const view = new DataView(frame.buffer, start, n * 8);
      for (let i = 0; i < n; i++) into[i] = view.getFloat64(i * 8, true);
    }
  } else if (start % 4 === 0) into.set(new Float32Array(frame.buffer, start, n));
  else {
    const view = new DataView(frame.buffer, start, n * 4);
    for (let i = 0; i < n; i++) into[i] = view.getFloat32(i * 4, true);
  }
}

/** Builds a frame (for publishers, tests and the benchmark). */
export function encodeFrame(channelId: string, firstTime: number, interval: number, values: ArrayLike<number>, valueType: typeof FRAME_FLOAT64 | typeof FRAME_FLOAT32 = FRAME_FLOAT64): Uint8Array {
  const id = new TextEncoder().encode(channelId);
  const width = valueType === FRAME_FLOAT64 ? 8 : 4;
  const valuesOffset = FRAME_HEADER_BYTES + padded(id.length);
  const frame = new Uint8Array(valuesOffset + values.length * width);
  const view = new DataView(frame.buffer);
  view.setUint32(0, FRAME_MAGIC, true);
  view.setUint8(4, FRAME_VERSION);
  view.setUint8(5, valueType);
  view.setUint16(6, id.length, true);
  view.setUint32(8, values.length, true);
  view.setUint32(12, 0, true);
  view.setFloat64(16, firstTime, true);
  view.setFloat64(24, interval, true);
  frame.set(id, FRAME_HEADER_BYTES);
  for (let i = 0; i < values.length; i++) {
    if (width === 8) view.setFloat64(valuesOffset + i * 8, values[i] as number, true);
    else view.setFloat32(valuesOffset + i * 4, values[i] as number, true);
  }
  return frame;
}
