import { compileDerived, compileDerivedSet, referencedNames, DerivedExpressionError, type ChannelDeclaration, type CompiledDerived, type DerivedDefinition } from './expression-model.js';

/**
 * Load-time compilation of a list of derived definitions with every problem collected, one line
 * each, naming the key path (`${listPath}[i].expression` or `.name`), for a configuration error
 * that shows them all at once. Each definition is first compiled on its own, with the other
 * definitions' names declared as channels without a range, so that one bad definition does not
 * hide the next; when all pass, the list is compiled together (dependency order, cycles, the
 * denominators of the substituted expressions).
 * Which names are channels is the caller's business (the daemon has no channel list: it takes the
 * referenced names, `referencedChannels`, and checks each against its subscriptions' channel
 * templates; `plateau analyze` passes the CSV columns).
 */
export interface CompiledDefinitions {
  compiled: CompiledDerived[];
  /** The channels referred to, with their ranges. */
  channels: ChannelDeclaration[];
}

export function compileDefinitions(
  definitions: DerivedDefinition[],
  channels: ChannelDeclaration[],
  listPath: string,
): { ok: true; result: CompiledDefinitions } | { ok: false; problems: string[] } {
  const problems: string[] = [];
  const derivedNames = definitions.map((d) => d.name);
  definitions.forEach((definition, i) => {
    const others = derivedNames.filter((name, j) => j !== i && typeof name === 'string' && !channels.some((c) => c.name === name)).map((name) => ({ name }));
    try {
      compileDerived(definition, [...channels, ...others], `${listPath}[${i}]`);
    } catch (err) {
      problems.push(describeError(err));
    }
  });
  if (problems.length > 0) return { ok: false, problems };
  try {
    return { ok: true, result: { compiled: compileDerivedSet(definitions, channels, listPath), channels } };
  } catch (err) {
    return { ok: false, problems: [describeError(err)] };
  }
}

/**
 * The channel names the definitions refer to (every referenced name that is not one of the
 * definitions), in order of first appearance, with the indices of the definitions using each.
 */
export function referencedChannels(definitions: DerivedDefinition[]): { name: string; definitions: number[] }[] {
  const derived = new Set(definitions.map((d) => d.name));
  const out: { name: string; definitions: number[] }[] = [];
  definitions.forEach((definition, i) => {
    for (const name of referencedNames(definition.expression)) {
      if (derived.has(name)) continue;
      const known = out.find((c) => c.name === name);
      if (known === undefined) out.push({ name, definitions: [i] });
      else if (!known.definitions.includes(i)) known.definitions.push(i);
    }
  });
  return out;
}

function describeError(err: unknown): string {
  if (err instanceof DerivedExpressionError) return err.message;
  throw err;
}
