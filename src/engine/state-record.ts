/**
 * Helpers for versioned state records: a canonical JSON text of plain data (object keys sorted, so
 * equal data gives equal text whatever the order it was built in) and a fingerprint of it
 * (FNV-1a, 64 bits as two 32-bit lanes with different offsets; 16 hex digits). A fingerprint tells
 * whether a checkpoint was made under the same options; it is not a security measure.
 */
export function canonicalJson(value: unknown): string {
  return JSON.stringify(sortKeys(value));
}

function sortKeys(value: unknown): unknown {
  if (Array.isArray(value)) return value.map(sortKeys);
  if (value === null || typeof value !== 'object') return value;
  const out: Record<string, unknown> = {};
  for (const key of Object.keys(value as Record<string, unknown>).sort()) {
    const v = (value as Record<string, unknown>)[key];
    if (v !== undefined) out[key] = sortKeys(v);
  }
  return out;
}

export function fingerprint(value: unknown): string {
  const text = canonicalJson(value);
  let a = 0x811c9dc5;
  let b = 0x01000193 ^ 0x5bd1e995;
  for (let i = 0; i < text.length; i++) {
    const c = text.charCodeAt(i);
    a = Math.imul(a ^ c, 0x01000193) >>> 0;
    b = Math.imul(b ^ c, 0x01000193) >>> 0;
    b = Math.imul(b ^ (b >>> 15), 0x2c1b3c6d) >>> 0;
  }
  return a.toString(16).padStart(8, '0') + b.toString(16).padStart(8, '0');
}

/** The top-level keys whose values differ between two plain objects. */
export function differingKeys(a: Record<string, unknown>, b: Record<string, unknown>): string[] {
  const keys = new Set([...Object.keys(a), ...Object.keys(b)]);
  return [...keys].filter((key) => canonicalJson(a[key]) !== canonicalJson(b[key])).sort();
}
