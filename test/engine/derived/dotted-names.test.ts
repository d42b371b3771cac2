import { describe, expect, it } from 'vitest';
import { compileDerived, compileDerivedSet, referencedNames, DerivedExpressionError, type ChannelDeclaration } from '../../../src/engine/derived/expression-model.js';

// The daemon's channel names carry dots (config/hx7-heat-exchanger.yaml: hx7.glycol_in_degC),
// which mathjs reads as property access. The expression model maps known dotted names to plain
// identifiers before parsing and maps them back in every message (expression-model.ts).

const hx7: ChannelDeclaration[] = [
  { name: 'hx7.glycol_flow_kg_s', range: [0, 5] },
  { name: 'hx7.glycol_in_degC', range: [-40, 150] },
  { name: 'hx7.glycol_out_degC', range: [-40, 150] },
  { name: 'a.b' },
  { name: 'a.b.c' },
];

function rejected(expression: string, channels = hx7): string {
  try {
    compileDerived({ name: 'q', expression }, channels, 'derived[4]');
  } catch (err) {
    expect(err).toBeInstanceOf(DerivedExpressionError);
    return (err as Error).message;
  }
  throw new Error(`expected "${expression}" to be rejected`);
}

describe('dotted channel and derived-result names', () => {
  it('heat duty over dotted names: inputs, value and sensitivities as written (common practice: Q = m_dot cp (T_in - T_out))', () => {
    const q = compileDerived({ name: 'hx7.heat_duty_kW', unit: 'kW', expression: 'hx7.glycol_flow_kg_s * 3.6 * (hx7.glycol_in_degC - hx7.glycol_out_degC)' }, hx7, 'derived[0]');
    expect(q.inputs).toEqual(['hx7.glycol_flow_kg_s', 'hx7.glycol_in_degC', 'hx7.glycol_out_degC']);
    const values = { 'hx7.glycol_flow_kg_s': 0.82, 'hx7.glycol_in_degC': 42, 'hx7.glycol_out_degC': 35.7 };
    expect(q.evaluate(values)).toBeCloseTo(0.82 * 3.6 * 6.3, 12);
    expect(Array.from(q.sensitivities(values)).map((v) => Number(v.toPrecision(12)))).toEqual([3.6 * 6.3, 0.82 * 3.6, -0.82 * 3.6].map((v) => Number(v.toPrecision(12))));
    const out = new Float64Array(1);
    q.model([Float64Array.of(1), Float64Array.of(10), Float64Array.of(4)], out);
    expect(out[0]).toBeCloseTo(21.6, 12);
  });

  it('the longest known name wins: a.b.c is the channel a.b.c, a.b * 2 the channel a.b', () => {
    expect(compileDerived({ name: 'q', expression: 'a.b.c - a.b * 2' }, hx7, 'derived[0]').inputs).toEqual(['a.b.c', 'a.b']);
  });

  it('numbers with dots and exponents are left alone', () => {
    const q = compileDerived({ name: 'q', expression: '1.5e3 * a.b + .5 * a.b.c - 2.' }, hx7, 'derived[0]');
    expect(q.evaluate({ 'a.b': 2, 'a.b.c': 4 })).toBe(3000);
  });

  it('a typo in a dotted name is reported as an unknown symbol, with the name as written and the known channels', () => {
    const message = rejected('hx7.glycol_inn_degC * 2');
    expect(message).toMatch(/^derived\[4\]\.expression: unknown symbol 'hx7\.glycol_inn_degC' \(known channels: hx7\.glycol_flow_kg_s, hx7\.glycol_in_degC/);
    expect(rejected('a.b.d + 1')).toMatch(/unknown symbol 'a\.b\.d'/);
  });

  it('property access after a known name is still property access, rejected by the whitelist', () => {
    expect(rejected('hx7.glycol_in_degC.constructor')).toMatch(/property access and indexing are not allowed/);
    expect(rejected('a.b["constructor"]')).toMatch(/property access and indexing are not allowed/);
  });

  it("'$' is rejected, so the mapping of dots cannot be forged", () => {
    expect(rejected('hx7$glycol_in_degC')).toMatch(/the character '\$' is not allowed \(at character 4\)/);
  });

  it('syntax errors point at the character of the text as written (the mapping keeps positions)', () => {
    expect(rejected('hx7.glycol_in_degC +* hx7.glycol_out_degC')).toMatch(/syntax error at character 21/);
  });

  it('the denominator check names dotted channels as written', () => {
    expect(rejected('hx7.glycol_in_degC / hx7.glycol_flow_kg_s')).toMatch(/the denominator 'hx7\.glycol_flow_kg_s' can be zero: over the declared ranges hx7\.glycol_flow_kg_s in \[0, 5\]/);
  });

  it('derived results with dotted names refer to each other', () => {
    const [dt, q] = compileDerivedSet(
      [
        { name: 'hx7.dt', expression: 'hx7.glycol_in_degC - hx7.glycol_out_degC' },
        { name: 'hx7.q', expression: 'hx7.glycol_flow_kg_s * 3.6 * hx7.dt' },
      ],
      hx7,
      'derived',
    );
    expect(dt?.inputs).toEqual(['hx7.glycol_in_degC', 'hx7.glycol_out_degC']);
    expect(q?.inputs).toEqual(['hx7.glycol_flow_kg_s', 'hx7.glycol_in_degC', 'hx7.glycol_out_degC']);
  });

  it('referencedNames lists the names as written, without functions, constants or numbers', () => {
    expect(referencedNames('sqrt(hx7.a) * pi + 2.5e-3 * cb2.ref - e ^ x_1 + log(y, 10) + "s.t"')).toEqual(['hx7.a', 'cb2.ref', 'x_1', 'y']);
  });
});
