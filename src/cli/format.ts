/**
 * Number formatting for reports. A result and its uncertainty are rounded together: the
 * uncertainty to two significant digits and the value to the same decimal place (JCGM 100:2008,
 * 7.2.6: uncertainties stated with at most two significant digits).
 */
export function roundWithUncertainty(value: number, uncertainty: number | null): { value: string; uncertainty: string | null } {
  if (uncertainty === null || !(uncertainty > 0) || !Number.isFinite(uncertainty)) {
    return { value: formatSignificant(value, 7), uncertainty: uncertainty === 0 ? '0' : null };
  }
  const exponent = Math.floor(Math.log10(uncertainty)) - 1; // place of the second significant digit
  const decimals = Math.max(0, -exponent);
  if (decimals > 20 || exponent > 20) return { value: formatSignificant(value, 7), uncertainty: formatSignificant(uncertainty, 2) };
  const scale = 10 ** exponent;
  const roundedU = Math.round(uncertainty / scale) * scale;
  const roundedV = Math.round(value / scale) * scale;
  return { value: roundedV.toFixed(decimals), uncertainty: roundedU.toFixed(decimals) };
}

export function formatSignificant(value: number | null, digits = 4): string {
  if (value === null || !Number.isFinite(value)) return '-';
  if (value === 0) return '0';
  const magnitude = Math.abs(value);
  if (magnitude >= 1e6 || magnitude < 1e-4) return value.toExponential(digits - 1);
  return Number(value.toPrecision(digits)).toString();
}

export function formatDuration(seconds: number | null): string {
  if (seconds === null || !Number.isFinite(seconds)) return '-';
  if (seconds < 60) return `${seconds.toFixed(seconds < 10 ? 1 : 0)} s`;
  if (seconds < 3600) return `${(seconds / 60).toFixed(1)} min`;
  if (seconds < 86400 * 2) return `${(seconds / 3600).toFixed(1)} h`;
  return `${(seconds / 86400).toFixed(1)} d`;
}

/** Lays out rows as a plain-text table with right-aligned numeric columns. */
export function textTable(header: string[], rows: string[][]): string {
  const widths = header.map((h, i) => Math.max(h.length, ...rows.map((r) => (r[i] ?? '').length)));
  const line = (cells: string[]) => cells.map((cell, i) => (i === 0 ? cell.padEnd(widths[i] as number) : cell.padStart(widths[i] as number))).join('  ');
  return [line(header), widths.map((w) => '-'.repeat(w)).join('  '), ...rows.map(line)].join('\n');
}

/** A whole number with thin-space digit groups of three (ISO 80000-1: 1 234 567), as people read long counts. */
export function groupDigits(value: number): string {
  if (!Number.isInteger(value)) return String(value);
  const text = String(Math.abs(value));
  if (text.length <= 4) return String(value);
  return `${value < 0 ? '-' : ''}${text.replace(/\B(?=(\d{3})+(?!\d))/g, '\u2009')}`;
}
