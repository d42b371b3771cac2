import { referencedChannels } from '../engine/derived/derived-definitions.js';
import { compileWithConstants, type BoundDerived, type DerivedConstant } from '../engine/derived/derived-constants.js';
import type { ChannelDeclaration, DerivedDefinition } from '../engine/derived/expression-model.js';

/**
 * The load-time check of the `derived` list, shared by the configuration reader (so that
 * `plateau run` lists every problem of a file, each naming it, before any broker or port is
 * opened) and the daemon's derived results (which compile the same way).
 *
 * The daemon has no channel list (channels appear with their first sample), so a name an
 * expression refers to that is not a derived result is a channel: it must be a name some
 * subscription's channel template can produce ({...} placeholders read as *), and takes its
 * declared range for the division check. Every problem is one line naming the key path: unknown
 * channels and the compiler's findings (syntax, functions, denominators, cycles) together; an
 * unknown channel is still compiled as a channel without a range so that the other problems of
 * its expression are found too. A name among a definition's named constants (`constants[i]` for
 * definition i, GUM H.1) is not a channel.
 */
export function checkDerivedDefinitions(
  definitions: DerivedDefinition[],
  templates: string[],
  rangeOf: (channel: string) => [number, number] | null,
  globMatch: (pattern: string, text: string) => boolean,
  constants: readonly (readonly DerivedConstant[])[] = [],
): { ok: true; result: { compiled: BoundDerived[]; channels: ChannelDeclaration[] } } | { ok: false; problems: string[] } {
  const constantNames = new Set(constants.flatMap((list) => list.map((c) => c.name)));
  const globs = templates.map((t) => t.replace(/\{\w+\}/g, '*'));
  const problems: string[] = [];
  const channels: ChannelDeclaration[] = [];
  const unknown: ChannelDeclaration[] = [];
  for (const { name, definitions: users } of referencedChannels(definitions)) {
    if (constantNames.has(name)) continue;
    if (!globs.some((glob) => globMatch(glob, name))) {
      for (const i of users) {
        problems.push(
          `derived[${i}].expression: unknown channel '${name}' in "${definitions[i]?.expression}": no subscription gives a channel of that name (channel templates: ${templates.join(', ') || 'none'}; derived results: ${definitions.map((d) => d.name).join(', ')})`,
        );
      }
      unknown.push({ name });
      continue;
    }
    const range = rangeOf(name);
    channels.push(range === null ? { name } : { name, range });
  }
  const compiled = compileWithConstants(definitions, [...channels, ...unknown], 'derived', constants);
  if (!compiled.ok) problems.push(...compiled.problems);
  if (problems.length > 0) {
    // One list in the order of the definitions (a definition's unknown channel before its other problems).
    const index = (line: string) => Number(/^derived\[(\d+)\]/.exec(line)?.[1] ?? Number.MAX_SAFE_INTEGER);
    return { ok: false, problems: problems.map((line, order) => ({ line, order })).sort((a, b) => index(a.line) - index(b.line) || a.order - b.order).map((p) => p.line) };
  }
  return compiled.ok ? { ok: true, result: { compiled: compiled.compiled, channels } } : { ok: false, problems };
}
