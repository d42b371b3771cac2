/**
 * CSV text (RFC 4180) for record exports: full-precision numbers, empty cells for missing or
 * non-finite values, quoting where needed, CRLF line ends, and a guard against formula injection
 * for spreadsheet users (text starting with = + - @ tab or CR is prefixed with ').
 */
export function csvCell(value: unknown): string {
  if (value === null || value === undefined) return '';
  const text = typeof value === 'number' ? (Number.isFinite(value) ? String(value) : '') : String(value);
  const safe = typeof value === 'string' && /^[=+\-@\t\r]/.test(text) ? `'${text}` : text;
  return /[",\r\n]/.test(safe) ? `"${safe.replace(/"/g, '""')}"` : safe;
}

/** A header row and data rows as CSV text. */
export function csvText(header: string[], rows: unknown[][]): string {
  return `${[header, ...rows].map((row) => row.map(csvCell).join(',')).join('\r\n')}\r\n`;
}
