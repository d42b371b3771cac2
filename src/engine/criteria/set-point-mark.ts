/**
 * A test point's set point for a channel's stability rules, as a control mark the store keeps at
 * the sample index it applies from (beside the window restarts), so that a replay applies it at
 * the same sample: `set-point:<number>` (the shortest text that reads back as the same double) or
 * `set-point:none`.
 */
const PREFIX = 'set-point:';

export function setPointMark(value: number | null): `set-point:${string}` {
  return `${PREFIX}${value === null || !Number.isFinite(value) ? 'none' : String(value)}`;
}

/** The set point a mark carries (null: none); undefined when the mark is not a set-point mark or is unreadable. */
export function parseSetPointMark(kind: string): number | null | undefined {
  if (!kind.startsWith(PREFIX)) return undefined;
  const text = kind.slice(PREFIX.length);
  if (text === 'none') return null;
  const value = Number(text);
  return text.trim() !== '' && Number.isFinite(value) ? value : undefined;
}
