import type { TypeBSpec } from '../../core/uncertainty/type-b-component.js';
import { compileDefinitions } from './derived-definitions.js';
import type { ChannelDeclaration, CompiledDerived, DerivedDefinition } from './expression-model.js';

/**
 * Named constants of derived expressions (JCGM 100:2008, GUM, H.1: the reference gauge's length
 * from its certificate, the thermal expansion coefficient from a handbook): a name, a value and the
 * constant's uncertainty as a Type B spec. The expression model compiles them as inputs like the
 * channels; `bindConstants` then takes them out of the inputs, so that everything that follows the
 * channels (the rows of the derived engine, the Type A propagation, the Monte Carlo check) sees the
 * constants fixed at their values, and gives their sensitivity coefficients apart: the combined
 * uncertainty (channel-combined.ts) enters each constant's u with its c.
 *
 * The constants of a list of derived results share one namespace (a result that refers to another
 * result uses that result's constants too): one name, one value.
 * Cost: one extra array per constant in a Monte Carlo model call; otherwise as the compiled model.
 */
export interface DerivedConstant {
  name: string;
  value: number;
  uncertainty: TypeBSpec;
}

export interface ConstantBinding {
  constants: DerivedConstant[];
  /** df/dc_k at the values (channels) and the constants' values, in the order of `constants`. */
  constantSensitivities(values: Record<string, number>): Float64Array;
}

export type BoundDerived = CompiledDerived & ConstantBinding;

export function bindConstants(compiled: CompiledDerived, all: readonly DerivedConstant[]): BoundDerived {
  const byName = new Map(all.map((c) => [c.name, c]));
  const full = compiled.inputs;
  const constantIndex: number[] = [];
  const channelIndex: number[] = [];
  full.forEach((name, i) => (byName.has(name) ? constantIndex : channelIndex).push(i));
  const constants = constantIndex.map((i) => byName.get(full[i] as string) as DerivedConstant);
  if (constants.length === 0) return { ...compiled, constants: [], constantSensitivities: () => new Float64Array(0) };
  const fixed: Record<string, number> = Object.fromEntries(constants.map((c) => [c.name, c.value]));
  const merged = (values: Record<string, number>) => ({ ...values, ...fixed });
  const pick = (array: Float64Array, indices: number[]) => Float64Array.from(indices, (i) => array[i] as number);
  const q = full.length;
  let filled: Float64Array[] = [];
  return {
    ...compiled,
    inputs: channelIndex.map((i) => full[i] as string),
    constants,
    model(arrays, out) {
      if (arrays.length !== channelIndex.length) throw new RangeError(`${compiled.name}: the model takes ${channelIndex.length} input arrays, got ${arrays.length}`);
      if ((filled[0]?.length ?? -1) !== out.length) filled = constants.map((c) => new Float64Array(out.length).fill(c.value));
      const args: Float64Array[] = new Array(q);
      channelIndex.forEach((i, j) => (args[i] = arrays[j] as Float64Array));
      constantIndex.forEach((i, j) => (args[i] = filled[j] as Float64Array));
      compiled.model(args, out);
    },
    evaluate: (values) => compiled.evaluate(merged(values)),
    evaluateSafely: (values) => compiled.evaluateSafely(merged(values)),
    sensitivities: (values) => pick(compiled.sensitivities(merged(values)), channelIndex),
    constantSensitivities: (values) => pick(compiled.sensitivities(merged(values)), constantIndex),
    higherDerivatives(values) {
      const { second, third } = compiled.higherDerivatives(merged(values));
      const p = channelIndex.length;
      const s = new Float64Array(p * p);
      const t = new Float64Array(p * p);
      channelIndex.forEach((i, a) =>
        channelIndex.forEach((j, b) => {
          s[a * p + b] = second[i * q + j] as number;
          t[a * p + b] = third[i * q + j] as number;
        }),
      );
      return { second: s, third: t };
    },
  };
}

/**
 * Compiles derived definitions with named constants per definition (`constants[i]` for definition
 * i): one line per problem (a constant named like a channel, one name with two values), then the
 * definitions with every constant declared, then each result bound to the constants it uses.
 */
export function compileWithConstants(
  definitions: DerivedDefinition[],
  channels: ChannelDeclaration[],
  listPath: string,
  constants: readonly (readonly DerivedConstant[])[],
): { ok: true; compiled: BoundDerived[] } | { ok: false; problems: string[] } {
  const problems: string[] = [];
  const all = new Map<string, DerivedConstant>();
  constants.forEach((list, i) =>
    list.forEach((c, j) => {
      const where = `${listPath}[${i}].constants[${j}].name`;
      if (channels.some((ch) => ch.name === c.name)) problems.push(`${where}: "${c.name}" is also a channel name`);
      else if (definitions.some((d) => d.name === c.name)) problems.push(`${where}: "${c.name}" is also a derived result's name`);
      const known = all.get(c.name);
      if (known !== undefined && (known.value !== c.value || JSON.stringify(known.uncertainty) !== JSON.stringify(c.uncertainty))) problems.push(`${where}: "${c.name}" is defined again with another value or uncertainty (constants share one namespace)`);
      else all.set(c.name, c);
    }),
  );
  if (problems.length > 0) return { ok: false, problems };
  const declared = [...channels, ...[...all.keys()].map((name) => ({ name }))];
  const result = compileDefinitions(definitions, declared, listPath);
  if (!result.ok) return result;
  const list = [...all.values()];
  return { ok: true, compiled: result.result.compiled.map((c) => bindConstants(c, list)) };
}
