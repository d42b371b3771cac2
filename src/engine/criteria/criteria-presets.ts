import type { CriterionSpec, SpecProblem } from '../../core/criteria/criterion-spec.js';

/**
 * Named presets: the stability rules of public test procedures, each citing the public document
 * it comes from and where its wording was read. The standards themselves are mostly sold, so the
 * wording was checked against public summaries or quotations (named in `source`); the `wording`
 * field paraphrases the rule with its numbers. Where the source leaves a choice open (an interval
 * to fit a gradient over, the length of a data period), the preset takes it as a parameter, and a
 * default that is ours says so in the parameter's description.
 *
 * A preset becomes an ordinary rule (CriterionSpec); users write their own rules in the same shape.
 * Every preset accepts `name`, `setPoint` and `holdSeconds` besides its own parameters.
 */
export interface PresetParameter {
  key: string;
  kind: 'number' | 'choice';
  choices?: readonly string[];
  /** Numbers: strictly above this. */
  above?: number;
  /** Default value; null when the parameter is required. */
  default: number | string | null;
  description: string;
}

export interface CriterionPreset {
  id: string;
  title: string;
  /** The public document, and where its wording was read. */
  source: string;
  /** The rule, paraphrased with its numbers, as the source states it. */
  wording: string;
  parameters: readonly PresetParameter[];
  /** Set point used when the configuration gives none. */
  setPoint: CriterionSpec['setPoint'];
  build(values: Readonly<Record<string, number | string>>): Omit<CriterionSpec, 'name' | 'preset' | 'source' | 'wording' | 'setPoint'>;
}

const PSTC_THREAD =
  'IEEE PSES EMC-PSTC mailing list, thread "Steady State Conditions - nee thermal equilibrium" (12 January 2012), quoting the IEC glossary: https://www.mail-archive.com/emc-pstc@listserv.ieee.org/msg62539.html';
const ASHRAE_93_QUOTE = 'ANSI/ASHRAE Standard 93, steady-state test conditions (edition not stated), quoted in a public forum post: http://www.gaoyang168.com/t-5996237-1';
const ISO_9806_SUMMARY = 'ISO 9806-1:1994, steady-state test conditions, as summarised at https://www.briangwilliams.us/solar-energy/glazed-collectors.html';
const CFR_91_410 = '40 CFR 91.410(b) (US public law text), read at https://law.lawstack.com/laws/40-cfr_s_91-410_engine-test-cycle';
const CFR_430_M =
  '10 CFR Part 430, Subpart B, Appendix M, notes to the test tolerance tables (US public law text), as reproduced at https://books.google.co.ke/books?id=ruLKI7jGZHEC&pg=PA122';

const ABSOLUTE_ZERO_DEGC = -273.15;

function readings(): CriterionSpec['basis'] {
  return { kind: 'readings' };
}

function base(): Pick<CriterionSpec, 'minReadings' | 'holdSeconds' | 'lag' | 'direction' | 'perSeconds' | 'comparison'> {
  return { minReadings: 0, holdSeconds: 0, lag: 1, direction: 'any', perSeconds: 1, comparison: 'at-most' };
}

const WINDOW_REQUIRED = (what: string): PresetParameter => ({
  key: 'windowSeconds',
  kind: 'number',
  above: 0,
  default: null,
  description: `length of ${what} in seconds (the source gives none)`,
});

export const CRITERION_PRESETS: readonly CriterionPreset[] = [
  {
    id: 'iec-62282-2',
    title: 'IEC 62282-2 thermal equilibrium: two readings 15 min apart',
    source: `IEC 62282-2 ed. 1.0 (2004-07), definition of thermal equilibrium conditions, as quoted in the ${PSTC_THREAD}`,
    wording: 'temperature changes of no more than 3 K, or 1 % of the absolute operating temperature if that is higher, between two readings 15 min apart',
    parameters: [{ key: 'temperatureUnit', kind: 'choice', choices: ['degC', 'K'], default: 'degC', description: 'unit of the channel, so that 1 % is taken of the absolute temperature' }],
    setPoint: { kind: 'none' },
    build: (v) => ({
      ...base(),
      statistic: 'change',
      basis: { kind: 'sampled', seconds: 900 },
      window: { kind: 'readings', readings: 2 },
      tolerance: { absolute: 3, relative: 0.01, relativeTo: 'reading', zero: v.temperatureUnit === 'K' ? 0 : ABSOLUTE_ZERO_DEGC },
      minReadings: 2,
    }),
  },
  {
    id: 'iec-61810-7',
    title: 'IEC 61810-7 thermal equilibrium: three readings 5 min apart',
    source: `IEC 61810-7 ed. 2.0 (2006-03), definition of thermal equilibrium, as quoted in the ${PSTC_THREAD}`,
    wording: 'a variation of less than 1 K between any two of three consecutive measurements taken 5 min apart',
    parameters: [],
    setPoint: { kind: 'none' },
    build: () => ({
      ...base(),
      statistic: 'range',
      basis: { kind: 'sampled', seconds: 300 },
      window: { kind: 'readings', readings: 3 },
      tolerance: { absolute: 1, relative: null, relativeTo: 'reading', zero: 0 },
      comparison: 'less-than',
      minReadings: 3,
    }),
  },
  {
    id: 'iec-60034-1',
    title: 'IEC 60034-1 thermal equilibrium: gradient of at most 2 K per hour',
    source: `IEC 60034-1 ed. 12.0 (2010-02), definition of thermal equilibrium and its note, as quoted in the ${PSTC_THREAD}`,
    wording:
      'the temperature rises vary by no more than a gradient of 2 K per hour; the note reads it from straight lines over two successive intervals, each with a gradient below 2 K per hour',
    parameters: [
      {
        key: 'intervalSeconds',
        kind: 'number',
        above: 0,
        default: 1800,
        description: 'interval the gradient is fitted over, which must then hold for another interval (the source leaves the interval to judgement; 1800 s is our choice)',
      },
    ],
    setPoint: { kind: 'none' },
    build: (v) => ({
      ...base(),
      statistic: 'slope',
      basis: readings(),
      window: { kind: 'seconds', seconds: v.intervalSeconds as number },
      tolerance: { absolute: 2, relative: null, relativeTo: 'reading', zero: 0 },
      perSeconds: 3600,
      holdSeconds: v.intervalSeconds as number,
      minReadings: 3,
    }),
  },
  {
    id: 'iec-60335-2-6',
    title: 'IEC 60335-2-6 steady temperature: less than 1 K in 15 min',
    source: `IEC 60335-2-6 (edition not stated), as cited by a contributor in the ${PSTC_THREAD}`,
    wording: 'less than 1 K of temperature change in 15 min',
    parameters: [],
    setPoint: { kind: 'none' },
    build: () => ({
      ...base(),
      statistic: 'change',
      basis: readings(),
      window: { kind: 'seconds', seconds: 900 },
      tolerance: { absolute: 1, relative: null, relativeTo: 'reading', zero: 0 },
      lag: 'window',
      comparison: 'less-than',
      minReadings: 2,
    }),
  },
  {
    id: 'ashrae-93-inlet-temperature',
    title: 'ASHRAE 93 inlet temperature within 2 % or 1.0 degC of its set point for 15 min',
    source: ASHRAE_93_QUOTE,
    wording: 'inlet temperature constant within 2 % or 1.0 degC (1.8 degF), whichever is greater, for 15 min before each data period',
    parameters: [{ key: 'temperatureUnit', kind: 'choice', choices: ['degC', 'degF'], default: 'degC', description: 'unit of the channel (1.0 degC or 1.8 degF; 2 % of the set point in that unit)' }],
    setPoint: { kind: 'test-point' },
    build: (v) => ({
      ...base(),
      statistic: 'setpoint-deviation',
      basis: readings(),
      window: { kind: 'seconds', seconds: 900 },
      tolerance: { absolute: v.temperatureUnit === 'degF' ? 1.8 : 1.0, relative: 0.02, relativeTo: 'setpoint', zero: 0 },
      minReadings: 1,
    }),
  },
  {
    id: 'ashrae-93-flow',
    title: 'ASHRAE 93 flow within 2 % or 0.000315 L/s of its set point for 15 min',
    source: ASHRAE_93_QUOTE,
    wording: 'flow rate constant within 2 % or 0.005 gpm (0.000315 L/s), whichever is greater, for 15 min before each data period',
    parameters: [{ key: 'flowUnit', kind: 'choice', choices: ['L/s', 'gpm'], default: 'L/s', description: 'unit of the channel (0.000315 L/s or 0.005 gpm)' }],
    setPoint: { kind: 'test-point' },
    build: (v) => ({
      ...base(),
      statistic: 'setpoint-deviation',
      basis: readings(),
      window: { kind: 'seconds', seconds: 900 },
      tolerance: { absolute: v.flowUnit === 'gpm' ? 0.005 : 0.000315, relative: 0.02, relativeTo: 'setpoint', zero: 0 },
      minReadings: 1,
    }),
  },
  {
    id: 'ashrae-93-ambient',
    title: 'ASHRAE 93 ambient temperature varying by no more than 1.5 degC over 15 min',
    source: ASHRAE_93_QUOTE,
    wording: 'ambient temperature varying by no more than plus or minus 1.5 degC (2.7 degF) over the same 15 min',
    parameters: [{ key: 'temperatureUnit', kind: 'choice', choices: ['degC', 'degF'], default: 'degC', description: 'unit of the channel (1.5 degC or 2.7 degF)' }],
    setPoint: { kind: 'none' },
    build: (v) => ({
      ...base(),
      statistic: 'deviation',
      basis: readings(),
      window: { kind: 'seconds', seconds: 900 },
      tolerance: { absolute: v.temperatureUnit === 'degF' ? 2.7 : 1.5, relative: null, relativeTo: 'reading', zero: 0 },
      minReadings: 2,
    }),
  },
  {
    id: 'ashrae-93-outlet',
    title: 'ASHRAE 93 outlet temperature changing less than 0.05 degC per minute',
    source: ASHRAE_93_QUOTE,
    wording: 'steady state when the fluid outlet temperature varies less than 0.05 degC (0.09 degF) per minute',
    parameters: [
      { key: 'temperatureUnit', kind: 'choice', choices: ['degC', 'degF'], default: 'degC', description: 'unit of the channel (0.05 degC or 0.09 degF per minute)' },
      {
        key: 'windowSeconds',
        kind: 'number',
        above: 0,
        default: 900,
        description: 'interval the least-squares gradient is fitted over (the source gives none; 900 s, the 15 min of the other conditions, is our choice)',
      },
    ],
    setPoint: { kind: 'none' },
    build: (v) => ({
      ...base(),
      statistic: 'slope',
      basis: readings(),
      window: { kind: 'seconds', seconds: v.windowSeconds as number },
      tolerance: { absolute: v.temperatureUnit === 'degF' ? 0.09 : 0.05, relative: null, relativeTo: 'reading', zero: 0 },
      perSeconds: 60,
      comparison: 'less-than',
      minReadings: 3,
    }),
  },
  {
    id: 'iso-9806-1994-flow',
    title: 'ISO 9806-1:1994 flow: 30 s averages within 1 % of the mean of the test period',
    source: ISO_9806_SUMMARY,
    wording:
      'averages over successive 30 s periods compared with the mean over the test period; the fluid flow stable within plus or minus 1 % during each test; test periods of at least 15 min',
    parameters: [{ key: 'windowSeconds', kind: 'number', above: 0, default: 900, description: 'test period in seconds (at least 15 min in the source)' }],
    setPoint: { kind: 'none' },
    build: (v) => ({
      ...base(),
      statistic: 'deviation',
      basis: { kind: 'averages', seconds: 30 },
      window: { kind: 'seconds', seconds: v.windowSeconds as number },
      tolerance: { absolute: null, relative: 0.01, relativeTo: 'reading', zero: 0 },
      minReadings: 2,
    }),
  },
  {
    id: 'us-40cfr91.410-speed',
    title: '40 CFR 91.410(b) engine speed within 50 rpm or 2 % of the set point',
    source: CFR_91_410,
    wording: 'during each non-idle mode, speed held within plus or minus 50 rpm or 2 percent of point, whichever is greater',
    parameters: [WINDOW_REQUIRED('the mode\'s data period')],
    setPoint: { kind: 'test-point' },
    build: (v) => ({
      ...base(),
      statistic: 'setpoint-deviation',
      basis: readings(),
      window: { kind: 'seconds', seconds: v.windowSeconds as number },
      tolerance: { absolute: 50, relative: 0.02, relativeTo: 'setpoint', zero: 0 },
      minReadings: 1,
    }),
  },
  {
    id: 'us-40cfr91.410-load',
    title: '40 CFR 91.410(b) load within 2 % of the set point',
    source: CFR_91_410,
    wording: 'during each non-idle mode, load held within plus or minus 2 percent of point',
    parameters: [WINDOW_REQUIRED('the mode\'s data period')],
    setPoint: { kind: 'test-point' },
    build: (v) => ({
      ...base(),
      statistic: 'setpoint-deviation',
      basis: readings(),
      window: { kind: 'seconds', seconds: v.windowSeconds as number },
      tolerance: { absolute: null, relative: 0.02, relativeTo: 'setpoint', zero: 0 },
      minReadings: 1,
    }),
  },
  {
    id: 'us-40cfr91.410-idle-speed',
    title: '40 CFR 91.410(b) idle speed within 75 rpm or 5 % of the specified idle speed',
    source: CFR_91_410,
    wording: 'during each idle mode, speed held within plus or minus 75 rpm or 5 percent of the specified idle speed, whichever is greater',
    parameters: [WINDOW_REQUIRED('the mode\'s data period')],
    setPoint: { kind: 'test-point' },
    build: (v) => ({
      ...base(),
      statistic: 'setpoint-deviation',
      basis: readings(),
      window: { kind: 'seconds', seconds: v.windowSeconds as number },
      tolerance: { absolute: 75, relative: 0.05, relativeTo: 'setpoint', zero: 0 },
      minReadings: 1,
    }),
  },
  {
    id: 'us-10cfr430-m-operating',
    title: '10 CFR 430 Appendix M test operating tolerance: the variation of every reading',
    source: CFR_430_M,
    wording:
      'test operating tolerance: the largest permitted variation of any measurement over the test interval; given as a percentage, a percentage of the average value',
    parameters: [
      WINDOW_REQUIRED('the test interval'),
      { key: 'tolerance', kind: 'number', above: 0, default: Number.NaN, description: 'the tolerance from the table for this quantity, in the channel unit' },
      { key: 'tolerancePercent', kind: 'number', above: 0, default: Number.NaN, description: 'or the tolerance as a percentage of the average value' },
    ],
    setPoint: { kind: 'none' },
    build: (v) => ({
      ...base(),
      statistic: 'range',
      basis: readings(),
      window: { kind: 'seconds', seconds: v.windowSeconds as number },
      tolerance: Number.isNaN(v.tolerancePercent as number)
        ? { absolute: v.tolerance as number, relative: null, relativeTo: 'reading', zero: 0 }
        : { absolute: null, relative: (v.tolerancePercent as number) / 100, relativeTo: 'reading', zero: 0 },
      minReadings: 2,
    }),
  },
  {
    id: 'us-10cfr430-m-condition',
    title: '10 CFR 430 Appendix M test condition tolerance: the average against the test condition',
    source: CFR_430_M,
    wording: 'test condition tolerance: the largest permitted difference between the average of a measurement and the specified test condition',
    parameters: [WINDOW_REQUIRED('the test interval'), { key: 'tolerance', kind: 'number', above: 0, default: null, description: 'the tolerance from the table for this quantity, in the channel unit' }],
    setPoint: { kind: 'test-point' },
    build: (v) => ({
      ...base(),
      statistic: 'mean-deviation',
      basis: readings(),
      window: { kind: 'seconds', seconds: v.windowSeconds as number },
      tolerance: { absolute: v.tolerance as number, relative: null, relativeTo: 'reading', zero: 0 },
      minReadings: 1,
    }),
  },
];

export const PRESET_IDS: readonly string[] = CRITERION_PRESETS.map((p) => p.id);

export function findPreset(id: string): CriterionPreset | undefined {
  return CRITERION_PRESETS.find((p) => p.id === id);
}

/** Keys a preset accepts besides `preset` itself. */
export function presetKeys(preset: CriterionPreset): string[] {
  return ['name', 'setPoint', 'holdSeconds', ...preset.parameters.map((p) => p.key)];
}

/**
 * The rule a preset stands for, with its parameters (defaults filled in) and the common overrides.
 * Problems come back per key, never thrown; the spec is null when a parameter is missing or wrong.
 */
export function presetSpec(
  id: string,
  params: Readonly<Record<string, unknown>> = {},
  overrides: { name?: string; setPoint?: CriterionSpec['setPoint']; holdSeconds?: number } = {},
): { spec: CriterionSpec | null; problems: SpecProblem[] } {
  const preset = findPreset(id);
  if (!preset) return { spec: null, problems: [{ key: 'preset', message: `unknown preset "${id}" (expected one of ${PRESET_IDS.join(', ')})` }] };
  const problems: SpecProblem[] = [];
  const values: Record<string, number | string> = {};
  for (const p of preset.parameters) {
    const given = params[p.key];
    if (given === undefined || given === null) {
      if (p.default === null) problems.push({ key: p.key, message: `missing: ${p.description}` });
      else values[p.key] = p.default;
      continue;
    }
    if (p.kind === 'choice') {
      if (typeof given !== 'string' || !(p.choices ?? []).includes(given)) problems.push({ key: p.key, message: `expected one of ${(p.choices ?? []).join(', ')}, got ${JSON.stringify(given)}` });
      else values[p.key] = given;
    } else if (typeof given !== 'number' || !Number.isFinite(given) || (p.above !== undefined && !(given > p.above))) {
      problems.push({ key: p.key, message: `expected a number${p.above !== undefined ? ` above ${p.above}` : ''}, got ${JSON.stringify(given)}` });
    } else values[p.key] = given;
  }
  if (preset.id === 'us-10cfr430-m-operating') {
    const both = !Number.isNaN(values.tolerance as number) && !Number.isNaN(values.tolerancePercent as number);
    const neither = Number.isNaN(values.tolerance as number) && Number.isNaN(values.tolerancePercent as number);
    if (both || neither) problems.push({ key: 'tolerance', message: 'give exactly one of tolerance (channel unit) or tolerancePercent (of the average value), from the table for this quantity' });
  }
  if (problems.length > 0) return { spec: null, problems };
  const built = preset.build(values);
  const spec: CriterionSpec = {
    ...built,
    name: overrides.name ?? preset.id,
    preset: preset.id,
    source: preset.source,
    wording: preset.wording,
    setPoint: overrides.setPoint ?? preset.setPoint,
    holdSeconds: overrides.holdSeconds ?? built.holdSeconds,
  };
  return { spec, problems };
}
