/**
 * Units as people write them. Payloads and configurations carry unit codes written for machines:
 * SenML's registered names (RFC 8428, section 12.1: "Cel", "m3/s", "%RH", "/min"), ASCII
 * spellings ("degC", "m/s2", "Ohm"). plateau keeps the code as given (the API's `unit`) and shows
 * its usual printed form (SI Brochure, 9th edition, and ISO 80000-1 for the symbols: °C, m³/s, Ω,
 * µ). `sameUnit` compares two codes by that printed form, so "Cel" and "degC" are the same unit.
 * The dashboard holds the same table (dashboard/lib/format.js, UNIT_LABELS); a test checks that
 * the two agree.
 */
export const UNIT_LABELS: Readonly<Record<string, string>> = {
  Cel: '°C',
  degC: '°C',
  deg_C: '°C',
  celsius: '°C',
  degF: '°F',
  deg_F: '°F',
  K: 'K',
  kelvin: 'K',
  Ohm: 'Ω',
  ohm: 'Ω',
  kOhm: 'kΩ',
  MOhm: 'MΩ',
  uV: 'µV',
  uA: 'µA',
  um: 'µm',
  us: 'µs',
  '%RH': '% RH',
  '/': '1',
  '/s': 's⁻¹',
  '/min': 'min⁻¹',
  '/h': 'h⁻¹',
  deg: '°',
  m2: 'm²',
  m3: 'm³',
  'm/s2': 'm/s²',
  'm3/s': 'm³/s',
  'm3/h': 'm³/h',
  'kg/m3': 'kg/m³',
  'W/m2': 'W/m²',
  'J/(kg K)': 'J/(kg·K)',
  'kJ/(kg K)': 'kJ/(kg·K)',
  'l/min': 'L/min',
  'l/h': 'L/h',
  l: 'L',
};

/** The printed form of a unit code: the table's, else the code with ASCII exponents raised (m2 -> m²). */
export function unitLabel(unit: string | null | undefined): string {
  if (unit === null || unit === undefined) return '';
  const known = UNIT_LABELS[unit];
  if (known !== undefined) return known;
  return unit.replace(/([A-Za-z])(-?[23])(?![0-9])/g, (_m, letter: string, power: string) => `${letter}${power.replace('-', '⁻').replace('2', '²').replace('3', '³')}`);
}

/** Whether two unit codes name the same unit (by their printed form). */
export function sameUnit(a: string, b: string): boolean {
  return unitLabel(a) === unitLabel(b);
}
