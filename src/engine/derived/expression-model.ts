import { all, create } from 'mathjs/number';
import type { EvalFunction, MathNode } from 'mathjs';
import type { VectorModel } from '../../core/propagation/monte-carlo-propagation.js';
import { PlateauError } from '../../errors/catalogue.js';

/**
 * Derived results from the config: a name, a unit and an expression over channel names and constants,
 * parsed by mathjs (number-only build, mathjs 15) and checked at load time, with sensitivity
 * coefficients df/dx_i from mathjs's symbolic `derivative`, compiled once.
 *
 * Names with dots. The daemon's channel names carry dots (hx7.glycol_in_degC, cb2.ref), which mathjs
 * reads as property access. Before parsing, every name token of the expression (ASCII letters,
 * digits and _, in dot-separated parts, the first part starting with a letter or _) that is a known
 * channel or derived-result name, or starts with one (the longest such prefix wins, so a.b.c is the
 * channel a.b.c when it exists, else a.b followed by .c), has its dots replaced by '$', which keeps
 * every character position (syntax errors point at the right place) and gives mathjs a plain
 * identifier. '$' itself is rejected in expressions, so the mapping is reversible, and every name in
 * a message is mapped back. A dotted token that is not a known name is reported as an unknown
 * symbol (a typo in a channel name) when it starts with no known name, constant or function, or
 * when other known names continue its known part with a dot (hx7.glycol_inn_degC beside
 * hx7.glycol_in_degC); otherwise (cp.constructor, sqrt.constructor, hx7.q.constructor) it is
 * left to mathjs, whose property access the whitelist rejects. Channels referred to in expressions must therefore be named with ASCII
 * letters, digits, _ and dots; other names (spaces, -, /, :) cannot be referred to.
 *
 * What an expression may contain (everything else is rejected at load with code ERR_CONFIG_DERIVED
 * and a message that names the key path):
 * - finite numeric literals, the constants pi and e, and channel names (a channel named pi or e hides
 *   the constant); names of other derived results only through compileDerivedSet, which orders the
 *   definitions by dependency, rejects cycles and substitutes each referenced expression;
 * - the operators + - * / ^ (binary), unary - and +, parentheses, implicit multiplication (2 x);
 * - the functions sqrt, exp, log (one or two arguments), log10, sin, cos, tan, abs, pow. abs is
 *   accepted although its derivative is undefined at 0 (there the sensitivities report an error);
 *   min and max are rejected because they are not differentiable where the arguments are equal and
 *   mathjs has no derivative for them; comparisons, conditionals, mod and factorial likewise.
 * Division (and a negative power) by an expression that can be zero: the denominator's range is
 * computed by interval arithmetic over the channels' declared ranges, widened outward by a few ulps;
 * when every channel in it has a range and the interval contains 0, the definition is rejected,
 * naming the channels and their ranges. Denominators that cannot be bounded (a channel without a
 * range, or a function the interval arithmetic does not follow, such as tan) are checked at every
 * evaluation instead: a zero denominator gives { ok: false, reason } rather than Infinity or NaN.
 *
 * Hardening (mathjs docs, "Security", and examples/advanced/more_secure_eval.js): no JavaScript
 * eval or Function anywhere (mathjs >= 4 builds closures in `compile`); a private instance of the
 * number-only build (no units, no matrices, no complex numbers, no createUnit); the syntax tree is
 * checked against a whitelist of node types, operators, functions and symbols before anything is
 * compiled, so property access (a.constructor, a["__proto__"]), assignments, function definitions,
 * blocks, and calls such as import(...), evaluate("..."), parse, simplify or derivative never reach
 * `compile`; and after the parser and derivative have been captured, the instance's import,
 * evaluate, parse, simplify, derivative and compile are replaced by functions that throw, as the
 * mathjs example does. Expressions longer than 2000 characters are rejected before parsing.
 *
 * Cost: load time O(size x inputs) for the derivatives (second and third derivatives only on first
 * use); one evaluation is a mathjs closure call per node, about 0.5 us for the 4-input heat duty
 * (measured: 0.54 s for 10^6 trials of `model`), so the Monte Carlo model runs trial by trial at that
 * rate.
 */
export class DerivedExpressionError extends PlateauError {
  constructor(
    readonly keyPath: string,
    detail: string,
  ) {
    super('ERR_CONFIG_DERIVED', { keyPath, detail });
    this.name = 'DerivedExpressionError';
  }
}

/** A derived result that cannot be evaluated for the given values (thrown by evaluate and sensitivities). */
export class DerivedEvaluationError extends PlateauError {
  constructor(message: string) {
    super('ERR_DERIVED_EVALUATION', { detail: message });
    this.name = 'DerivedEvaluationError';
  }
}

export interface DerivedDefinition {
  name: string;
  unit?: string;
  expression: string;
}

export interface ChannelDeclaration {
  name: string;
  /** Declared [low, high] the channel's values stay within, used to prove denominators non-zero. */
  range?: [number, number];
}

export type DerivedEvaluation = { ok: true; value: number } | { ok: false; reason: string };

export interface CompiledDerived {
  name: string;
  unit: string | null;
  expression: string;
  /** Channel names the expression uses, in order of first appearance; the order of every array below. */
  inputs: string[];
  /** Vectorised model over `inputs` for Monte Carlo; a rejected evaluation writes NaN. */
  model: VectorModel;
  /** The value; throws DerivedEvaluationError with the reason when it is rejected. */
  evaluate(values: Record<string, number>): number;
  evaluateSafely(values: Record<string, number>): DerivedEvaluation;
  /** df/dx_i at the values, by mathjs's symbolic derivative; throws DerivedEvaluationError when one is not finite. */
  sensitivities(values: Record<string, number>): Float64Array;
  /**
   * Second derivatives (p x p) and, at (i, j), d3f/(dx_i dx_j^2), for the higher-order terms of
   * GUM 5.1.2 Note (secondOrderVariance); compiled on first use.
   */
  higherDerivatives(values: Record<string, number>): { second: Float64Array; third: Float64Array };
}

// ------------------------------------------------------------------------------------------------
// The private mathjs instance, hardened once at module load.

const math = create(all as NonNullable<typeof all>);
const parse = math.parse;
const derivative = math.derivative;
const disabled = (what: string) => () => {
  throw new Error(`${what} is disabled in derived expressions`);
};
math.import(
  {
    import: disabled('import'),
    createUnit: disabled('createUnit'),
    evaluate: disabled('evaluate'),
    parse: disabled('parse'),
    simplify: disabled('simplify'),
    derivative: disabled('derivative'),
    compile: disabled('compile'),
  },
  { override: true },
);

const MAX_EXPRESSION_LENGTH = 2000;
const CONSTANTS = new Map<string, number>([
  ['pi', Math.PI],
  ['e', Math.E],
]);
/** Allowed functions and their accepted argument counts. */
const FUNCTIONS = new Map<string, number[]>([
  ['sqrt', [1]],
  ['exp', [1]],
  ['log', [1, 2]],
  ['log10', [1]],
  ['sin', [1]],
  ['cos', [1]],
  ['tan', [1]],
  ['abs', [1]],
  ['pow', [2]],
]);
const OPERATORS = new Set(['add', 'subtract', 'multiply', 'divide', 'pow', 'unaryMinus', 'unaryPlus']);
/** A name an expression can refer to: dot-separated parts of ASCII letters, digits and _, the first starting with a letter or _. */
const NAME = /^[A-Za-z_][A-Za-z0-9_]*(?:\.[A-Za-z0-9_]+)*$/;
const NODE_WORDS: Record<string, string> = {
  AssignmentNode: 'assignments',
  FunctionAssignmentNode: 'function definitions',
  BlockNode: 'several statements (separated by ; or a new line)',
  AccessorNode: 'property access and indexing',
  IndexNode: 'property access and indexing',
  ConditionalNode: 'conditionals (a ? b : c)',
  ArrayNode: 'matrices',
  ObjectNode: 'objects',
  RangeNode: 'ranges (a:b)',
  RelationalNode: 'comparisons',
};

/**
 * Compiles one derived definition over the given channels. `keyPath` is the config path of the
 * definition (e.g. "derived[0]"); error messages name `${keyPath}.expression` (or `.name`).
 * @throws DerivedExpressionError (code ERR_CONFIG_DERIVED) for any rejected definition.
 */
export function compileDerived(definition: DerivedDefinition, channels: ChannelDeclaration[], keyPath: string): CompiledDerived {
  const context = makeContext(channels, keyPath);
  checkName(definition, context, new Set());
  const tree = parseExpression(definition, keyPath, context, new Set());
  return compileTree(definition, tree, context);
}

/**
 * Compiles a list of derived definitions that may refer to each other by name: each is compiled after
 * the ones it uses, with their expressions substituted, so that every result is a function of channels
 * only (its sensitivities and Monte Carlo model then carry the correlations between results).
 * `keyPath` is the path of the list (e.g. "derived"); definition i is `${keyPath}[i]`.
 * @returns the compiled results in the order of `definitions`.
 * @throws DerivedExpressionError for a rejected definition, a duplicate name, or a cycle.
 */
export function compileDerivedSet(definitions: DerivedDefinition[], channels: ChannelDeclaration[], keyPath: string): CompiledDerived[] {
  const byName = new Map<string, number>();
  definitions.forEach((d, i) => {
    const context = makeContext(channels, `${keyPath}[${i}]`);
    checkName(d, context, new Set(byName.keys()));
    byName.set(d.name, i);
  });
  const derivedNames = new Set(byName.keys());
  const trees = definitions.map((d, i) => parseExpression(d, `${keyPath}[${i}]`, makeContext(channels, `${keyPath}[${i}]`), derivedNames));
  const dependencies = trees.map((tree) => {
    const used = new Set<string>();
    for (const node of tree.filter((n) => n.type === 'SymbolNode')) {
      const name = decodeName((node as unknown as { name: string }).name);
      if (byName.has(name)) used.add(name);
    }
    return [...used];
  });
  const substituted = new Map<string, MathNode>();
  const compiled: (CompiledDerived | undefined)[] = new Array(definitions.length);
  const state = new Map<string, 'visiting' | 'done'>();
  const visit = (name: string, path: string[]): void => {
    const index = byName.get(name) as number;
    if (state.get(name) === 'done') return;
    if (state.get(name) === 'visiting') {
      const cycle = [...path.slice(path.indexOf(name)), name].join(' -> ');
      throw new DerivedExpressionError(`${keyPath}[${index}].expression`, `derived results refer to each other in a cycle: ${cycle}`);
    }
    state.set(name, 'visiting');
    for (const dependency of dependencies[index] as string[]) visit(dependency, [...path, name]);
    const tree = (trees[index] as MathNode).transform((node) => {
      const symbol = node.type === 'SymbolNode' ? decodeName((node as unknown as { name: string }).name) : null;
      const replacement = symbol === null ? undefined : substituted.get(symbol);
      return replacement === undefined ? node : new math.ParenthesisNode(replacement.cloneDeep());
    });
    const definition = definitions[index] as DerivedDefinition;
    compiled[index] = compileTree(definition, tree, makeContext(channels, `${keyPath}[${index}]`));
    substituted.set(name, tree);
    state.set(name, 'done');
  };
  for (const d of definitions) visit(d.name, []);
  return compiled as CompiledDerived[];
}

// ------------------------------------------------------------------------------------------------

interface Context {
  keyPath: string;
  /** Channels by their mathjs symbol (dots replaced by '$'). */
  channels: Map<string, ChannelDeclaration>;
}

/** The mathjs symbol of a name: dots become '$' (rejected in expression text, so this is reversible). */
function encodeName(name: string): string {
  return name.replaceAll('.', '$');
}

/** A name, or any text printed from a tree, as the user wrote it. */
function decodeName(text: string): string {
  return text.replaceAll('$', '.');
}

function knownChannelList(context: Context): string {
  const known = [...context.channels.values()].map((c) => c.name);
  return known.length <= 30 ? known.join(', ') : `${known.slice(0, 30).join(', ')}, ... (${known.length} in all)`;
}

function unknownSymbol(name: string, context: Context): string {
  return `unknown symbol '${name}' (known channels: ${knownChannelList(context) || 'none'}; constants: pi, e; channel names in expressions may contain only ASCII letters, digits, _ and dots)`;
}

const NAME_TOKEN = /[A-Za-z_\u0080-\uffff][A-Za-z0-9_\u0080-\uffff]*(?:\.[A-Za-z0-9_\u0080-\uffff]+)*/y;
const NUMBER_TOKEN = /[0-9]*\.?[0-9]*(?:[eE][+-]?[0-9]+)?/y;

interface Token {
  /** name: a name with its dotted parts; quoted: a string literal (rejected later by the whitelist); number; other: one character. */
  kind: 'name' | 'quoted' | 'number' | 'other';
  text: string;
  /** Index of the token's first character. */
  start: number;
}

/**
 * The expression tokenizer (the only one): names with dotted parts (ASCII letters, digits and _, or
 * any character from U+0080, the first part not starting with a digit), numbers (so that the
 * exponent of 1e5 or the fraction of .5 is not read as a name), quoted strings (skipped whole, so
 * that nothing inside them is read as a name) and single other characters. Lossless: the tokens'
 * texts put together give the expression back, so positions never move.
 */
function* tokens(text: string): Generator<Token> {
  let i = 0;
  while (i < text.length) {
    const c = text[i] as string;
    if (c === '"' || c === "'") {
      let j = i + 1;
      while (j < text.length && text[j] !== c) j += text[j] === '\\' ? 2 : 1;
      const end = Math.min(text.length, j + 1);
      yield { kind: 'quoted', text: text.slice(i, end), start: i };
      i = end;
      continue;
    }
    if ((c >= '0' && c <= '9') || (c === '.' && /[0-9]/.test(text[i + 1] ?? ''))) {
      NUMBER_TOKEN.lastIndex = i;
      NUMBER_TOKEN.exec(text);
      const end = Math.max(i + 1, NUMBER_TOKEN.lastIndex);
      yield { kind: 'number', text: text.slice(i, end), start: i };
      i = end;
      continue;
    }
    NAME_TOKEN.lastIndex = i;
    const match = NAME_TOKEN.exec(text);
    if (match === null) {
      yield { kind: 'other', text: c, start: i };
      i++;
      continue;
    }
    yield { kind: 'name', text: match[0], start: i };
    i += match[0].length;
  }
}

/**
 * The names an expression refers to (channels or derived results), as written: every name token
 * that is not a function call, a constant or a function name, in order of first appearance. For
 * callers that must find out which channels to declare before compiling (the daemon, whose
 * channels come from the data). No parsing: a syntax error is reported by the compile step.
 */
export function referencedNames(expression: string): string[] {
  const out: string[] = [];
  if (typeof expression !== 'string') return out;
  for (const token of tokens(expression)) {
    if (token.kind !== 'name') continue;
    const name = token.text;
    const first = name.split('.')[0] as string;
    const end = token.start + name.length;
    const call = /^\s*\(/.test(expression.slice(end, end + 64));
    if (call || CONSTANTS.has(name) || FUNCTIONS.has(first) || (name.includes('.') && CONSTANTS.has(first))) continue;
    if (NAME.test(name) && !out.includes(name)) out.push(name);
  }
  return out;
}

/**
 * Replaces the dots of known dotted names by '$' (see the module comment); every other character is
 * kept, so positions do not move. `known` holds the channel and derived-result names.
 */
function encodeNames(text: string, known: Set<string>, context: Context, where: string): string {
  let out = '';
  for (const token of tokens(text)) {
    if (token.kind === 'other' && token.text === '$') throw new DerivedExpressionError(where, `the character '$' is not allowed (at character ${token.start + 1}) in "${text}"`);
    if (token.kind !== 'name' || !token.text.includes('.')) {
      out += token.text;
      continue;
    }
    const name = token.text;
    const parts = name.split('.');
    let prefix = 0;
    for (let k = parts.length; k >= 1 && prefix === 0; k--) if (known.has(parts.slice(0, k).join('.'))) prefix = k;
    if (prefix === parts.length) {
      out += encodeName(name);
      continue;
    }
    if (prefix >= 1) {
      const head = parts.slice(0, prefix).join('.');
      // Other known names continue this one with a dot: the token reads as a misspelt one of them.
      const family = [...known].some((other) => other.startsWith(`${head}.`));
      if (!family) {
        out += `${encodeName(head)}.${parts.slice(prefix).join('.')}`; // property access: the whitelist rejects it after parsing
        continue;
      }
    } else if (CONSTANTS.has(parts[0] as string) || FUNCTIONS.has(parts[0] as string)) {
      out += name; // property access on a constant or function: rejected after parsing
      continue;
    }
    throw new DerivedExpressionError(where, `${unknownSymbol(name, context)} in "${text}"`);
  }
  return out;
}

function makeContext(channels: ChannelDeclaration[], keyPath: string): Context {
  const map = new Map<string, ChannelDeclaration>();
  for (const channel of channels) {
    if (channel.range !== undefined) {
      const [low, high] = channel.range;
      if (!Number.isFinite(low) || !Number.isFinite(high) || !(low <= high)) {
        throw new DerivedExpressionError(keyPath, `channel '${channel.name}' has an invalid range [${low}, ${high}]: expected finite low <= high`);
      }
    }
    map.set(encodeName(channel.name), channel);
  }
  return { keyPath, channels: map };
}

function checkName(definition: DerivedDefinition, context: Context, taken: Set<string>): void {
  const { name } = definition;
  const where = `${context.keyPath}.name`;
  if (typeof name !== 'string' || !NAME.test(name)) throw new DerivedExpressionError(where, `'${String(name)}' is not a valid name: use letters, digits, _ and dots, and start with a letter or _`);
  if (context.channels.has(encodeName(name))) throw new DerivedExpressionError(where, `'${name}' is already a channel name`);
  if (CONSTANTS.has(name) || FUNCTIONS.has(name)) throw new DerivedExpressionError(where, `'${name}' is a reserved name (constant or function)`);
  if (taken.has(name)) throw new DerivedExpressionError(where, `'${name}' is defined twice`);
  if (definition.unit !== undefined && typeof definition.unit !== 'string') throw new DerivedExpressionError(`${context.keyPath}.unit`, 'unit must be a string');
}

function parseExpression(definition: DerivedDefinition, keyPath: string, context: Context, derivedNames: Set<string>): MathNode {
  const where = `${keyPath}.expression`;
  const text = definition.expression;
  if (typeof text !== 'string' || text.trim() === '') throw new DerivedExpressionError(where, 'expression is empty');
  if (text.length > MAX_EXPRESSION_LENGTH) throw new DerivedExpressionError(where, `expression is longer than ${MAX_EXPRESSION_LENGTH} characters`);
  const known = new Set<string>(derivedNames);
  for (const channel of context.channels.values()) known.add(channel.name);
  const encoded = encodeNames(text, known, context, where);
  try {
    return parse(encoded);
  } catch (err) {
    const e = err as { message?: string; char?: number };
    const message = (e.message ?? String(err)).replace(/\s*\(char \d+\)\s*$/, '');
    const at = typeof e.char === 'number' ? ` at character ${e.char}` : '';
    throw new DerivedExpressionError(where, `syntax error${at} in "${text}": ${message}`);
  }
}

/** Checks the tree against the whitelist; returns the channel symbols used (encoded), in order of first appearance. */
function checkTree(tree: MathNode, context: Context, text: string): string[] {
  const where = `${context.keyPath}.expression`;
  const reject = (detail: string): never => {
    throw new DerivedExpressionError(where, `${detail} in "${text}"`);
  };
  const inputs: string[] = [];
  const visit = (node: MathNode): void => {
    const n = node as unknown as Record<string, unknown>;
    switch (node.type) {
      case 'ConstantNode': {
        const value = n['value'];
        if (typeof value !== 'number' || !Number.isFinite(value)) reject(`only finite numbers are allowed as constants, not ${typeof value === 'string' ? JSON.stringify(value) : String(value)}`);
        return;
      }
      case 'SymbolNode': {
        const name = n['name'] as string;
        if (context.channels.has(name)) {
          if (!inputs.includes(name)) inputs.push(name);
          return;
        }
        if (CONSTANTS.has(name)) return;
        return reject(unknownSymbol(decodeName(name), context));
      }
      case 'OperatorNode': {
        const fn = n['fn'] as string;
        if (!OPERATORS.has(fn)) reject(`operator '${String(n['op'])}' is not allowed (allowed: + - * / ^)`);
        for (const arg of n['args'] as MathNode[]) visit(arg);
        return;
      }
      case 'ParenthesisNode':
        return visit(n['content'] as MathNode);
      case 'FunctionNode': {
        const fn = n['fn'] as MathNode;
        const args = n['args'] as MathNode[];
        if (fn.type !== 'SymbolNode') return reject('only calls of named functions are allowed');
        const name = decodeName((fn as unknown as { name: string }).name);
        if (name === 'min' || name === 'max') reject(`function '${name}' is not allowed: it is not differentiable where its arguments are equal, so no sensitivity coefficient exists there`);
        const arities = FUNCTIONS.get(name);
        if (arities === undefined) reject(`function '${name}' is not allowed (allowed: ${[...FUNCTIONS.keys()].join(', ')})`);
        if (!(arities as number[]).includes(args.length)) reject(`function '${name}' takes ${(arities as number[]).join(' or ')} argument(s), not ${args.length}`);
        for (const arg of args) visit(arg);
        return;
      }
      default:
        return reject(`${NODE_WORDS[node.type] ?? `'${node.type}' expressions`} are not allowed`);
    }
  };
  visit(tree);
  if (inputs.length === 0) reject('the expression uses no channel');
  return inputs;
}

// ------------------------------------------------------------------------------------------------
// Interval arithmetic over declared channel ranges, for the load-time denominator check.

type Interval = [number, number];
const WIDEN = 4 * Number.EPSILON;

/** Outward widening by a few ulps of the largest magnitude involved, so round-off cannot hide a zero. */
function widen(low: number, high: number, magnitude: number): Interval | null {
  const slack = WIDEN * magnitude;
  const out: Interval = [low - slack, high + slack];
  return Number.isFinite(out[0]) && Number.isFinite(out[1]) ? out : null;
}

function magnitudeOf(...intervals: Interval[]): number {
  let m = 0;
  for (const [a, b] of intervals) m = Math.max(m, Math.abs(a), Math.abs(b));
  return m;
}

function containsZero(x: Interval): boolean {
  return x[0] <= 0 && x[1] >= 0;
}

function multiply(a: Interval, b: Interval): Interval | null {
  const products = [a[0] * b[0], a[0] * b[1], a[1] * b[0], a[1] * b[1]];
  return widen(Math.min(...products), Math.max(...products), Math.max(...products.map(Math.abs)));
}

function reciprocal(x: Interval): Interval | null {
  if (containsZero(x)) return null;
  return widen(1 / x[1], 1 / x[0], Math.max(Math.abs(1 / x[0]), Math.abs(1 / x[1])));
}

function integerPower(x: Interval, n: number): Interval | null {
  if (n === 0) return [1, 1];
  if (n < 0) {
    const positive = integerPower(x, -n);
    return positive === null ? null : reciprocal(positive);
  }
  const a = x[0] ** n;
  const b = x[1] ** n;
  let low = Math.min(a, b);
  const high = Math.max(a, b);
  if (n % 2 === 0 && containsZero(x)) low = 0;
  return widen(low, high, Math.max(Math.abs(a), Math.abs(b)));
}

function power(base: Interval, exponent: Interval): Interval | null {
  if (exponent[0] === exponent[1]) {
    const n = exponent[0];
    if (Number.isInteger(n) && Math.abs(n) <= 64) return integerPower(base, n);
    if (base[0] > 0 || (base[0] >= 0 && n > 0)) {
      const a = base[0] ** n;
      const b = base[1] ** n;
      return widen(Math.min(a, b), Math.max(a, b), Math.max(Math.abs(a), Math.abs(b)));
    }
  }
  return null;
}

function monotone(x: Interval | null, f: (v: number) => number, domainLow: number, strict: boolean): Interval | null {
  if (x === null || (strict ? !(x[0] > domainLow) : !(x[0] >= domainLow))) return null;
  const a = f(x[0]);
  const b = f(x[1]);
  return widen(a, b, Math.max(Math.abs(a), Math.abs(b)));
}

function intervalOf(node: MathNode, context: Context): Interval | null {
  const n = node as unknown as Record<string, unknown>;
  switch (node.type) {
    case 'ConstantNode': {
      const v = n['value'] as number;
      return [v, v];
    }
    case 'SymbolNode': {
      const name = n['name'] as string;
      const channel = context.channels.get(name);
      if (channel !== undefined) return channel.range === undefined ? null : [channel.range[0], channel.range[1]];
      const constant = CONSTANTS.get(name) as number;
      return widen(constant, constant, constant);
    }
    case 'ParenthesisNode':
      return intervalOf(n['content'] as MathNode, context);
    case 'OperatorNode': {
      const args = (n['args'] as MathNode[]).map((a) => intervalOf(a, context));
      if (args.some((a) => a === null)) return null;
      const [a, b] = args as [Interval, Interval | undefined];
      switch (n['fn']) {
        case 'unaryPlus':
          return a;
        case 'unaryMinus':
          return [-a[1], -a[0]];
        case 'add':
          return widen(a[0] + (b as Interval)[0], a[1] + (b as Interval)[1], magnitudeOf(a, b as Interval));
        case 'subtract':
          return widen(a[0] - (b as Interval)[1], a[1] - (b as Interval)[0], magnitudeOf(a, b as Interval));
        case 'multiply':
          return multiply(a, b as Interval);
        case 'divide': {
          const inverse = reciprocal(b as Interval);
          return inverse === null ? null : multiply(a, inverse);
        }
        case 'pow':
          return power(a, b as Interval);
        default:
          return null;
      }
    }
    case 'FunctionNode': {
      const name = ((n['fn'] as unknown as { name: string }).name);
      const args = (n['args'] as MathNode[]).map((a) => intervalOf(a, context));
      const x = args[0] ?? null;
      switch (name) {
        case 'sqrt':
          return monotone(x, Math.sqrt, 0, false);
        case 'exp':
          return monotone(x, Math.exp, -Infinity, false);
        case 'log':
          return args.length === 1 ? monotone(x, Math.log, 0, true) : null;
        case 'log10':
          return monotone(x, Math.log10, 0, true);
        case 'sin':
        case 'cos':
          return [-1, 1];
        case 'abs':
          if (x === null) return null;
          if (x[0] >= 0) return x;
          if (x[1] <= 0) return [-x[1], -x[0]];
          return [0, Math.max(-x[0], x[1])];
        case 'pow':
          return x === null || args[1] === null || args[1] === undefined ? null : power(x, args[1]);
        default:
          return null; // tan and anything else: not followed
      }
    }
    default:
      return null;
  }
}

interface Guard {
  text: string;
  compiled: EvalFunction;
}

/**
 * Finds the denominators (right operand of '/', base of a negative constant power): rejects those
 * proven able to be zero, returns the ones that could not be bounded for checking at run time.
 */
function checkDenominators(tree: MathNode, context: Context, text: string): Guard[] {
  const where = `${context.keyPath}.expression`;
  const guards: Guard[] = [];
  const seen = new Set<string>();
  for (const node of tree.filter((x) => x.type === 'OperatorNode' || (x.type === 'FunctionNode' && (x as unknown as { fn: { name?: string } }).fn.name === 'pow'))) {
    const n = node as unknown as { fn: string | { name?: string }; args: MathNode[] };
    const isPow = n.fn === 'pow' || (typeof n.fn === 'object' && n.fn.name === 'pow');
    let denominator: MathNode | undefined;
    if (n.fn === 'divide') denominator = n.args[1];
    else if (isPow) {
      const exponent = intervalOf(n.args[1] as MathNode, context);
      if (exponent !== null && exponent[1] < 0) denominator = n.args[0];
    }
    if (denominator === undefined) continue;
    const shown = decodeName(denominator.toString());
    const names = [...new Set(denominator.filter((x) => x.type === 'SymbolNode').map((x) => (x as unknown as { name: string }).name))].filter((name) => context.channels.has(name));
    const allRanged = names.every((name) => context.channels.get(name)?.range !== undefined);
    const range = intervalOf(denominator, context);
    if (range !== null && containsZero(range) && allRanged) {
      if (names.length === 0) throw new DerivedExpressionError(where, `division by zero: the denominator '${shown}' is zero in "${text}"`);
      const ranges = names.map((name) => `${decodeName(name)} in [${(context.channels.get(name)?.range as [number, number]).join(', ')}]`).join(' and ');
      throw new DerivedExpressionError(
        where,
        `the denominator '${shown}' can be zero: over the declared ranges ${ranges} it spans [${fmt(range[0])}, ${fmt(range[1])}]; narrow the channel range(s) or change "${text}"`,
      );
    }
    if (range === null || !allRanged) {
      if (!seen.has(shown)) {
        seen.add(shown);
        guards.push({ text: shown, compiled: denominator.compile() });
      }
    }
  }
  return guards;
}

function fmt(v: number): string {
  return Number(v.toPrecision(6)).toString();
}

// ------------------------------------------------------------------------------------------------

function compileTree(definition: DerivedDefinition, tree: MathNode, context: Context): CompiledDerived {
  const text = definition.expression;
  const symbols = checkTree(tree, context, text);
  const inputs = symbols.map((symbol) => (context.channels.get(symbol) as ChannelDeclaration).name);
  const guards = checkDenominators(tree, context, text);
  const main = tree.compile();
  const where = `${context.keyPath}.expression`;
  const differentiate = (node: MathNode, variable: string): MathNode => {
    try {
      return derivative(node, variable, { simplify: false });
    } catch (err) {
      throw new DerivedExpressionError(where, `no derivative with respect to '${decodeName(variable)}': ${decodeName((err as Error).message)}`);
    }
  };
  const firstDerivatives = symbols.map((symbol) => differentiate(tree, symbol));
  const sensitivityFunctions = firstDerivatives.map((node) => node.compile());
  let higher: { second: EvalFunction[]; third: EvalFunction[] } | null = null;

  const scope = new Map<string, number>();
  const p = inputs.length;
  const fill = (values: Record<string, number>): string | null => {
    for (let i = 0; i < p; i++) {
      const name = inputs[i] as string;
      const v = Object.hasOwn(values, name) ? values[name] : undefined;
      if (typeof v !== 'number' || !Number.isFinite(v)) return `no finite value for channel '${name}'`;
      scope.set(symbols[i] as string, v);
    }
    return null;
  };
  const guardFailure = (): string | null => {
    for (const guard of guards) {
      const d = guard.compiled.evaluate(scope) as unknown;
      if (d === 0) return `division by zero: the denominator '${guard.text}' is 0`;
    }
    return null;
  };
  const run = (): DerivedEvaluation => {
    const reason = guardFailure();
    if (reason !== null) return { ok: false, reason };
    const value = main.evaluate(scope) as unknown;
    if (typeof value !== 'number') return { ok: false, reason: 'the result is not a real number' };
    if (Number.isNaN(value)) return { ok: false, reason: 'the result is not a real number (e.g. the square root or logarithm of a negative value)' };
    if (!Number.isFinite(value)) return { ok: false, reason: 'the result is infinite (e.g. a logarithm of zero or an overflow)' };
    return { ok: true, value };
  };
  const evaluateSafely = (values: Record<string, number>): DerivedEvaluation => {
    const missing = fill(values);
    return missing === null ? run() : { ok: false, reason: missing };
  };
  const evaluateDerivatives = (functions: EvalFunction[], values: Record<string, number>, what: string): Float64Array => {
    const missing = fill(values);
    if (missing !== null) throw new DerivedEvaluationError(`${definition.name}: ${missing}`);
    const out = new Float64Array(functions.length);
    functions.forEach((f, i) => {
      const v = f.evaluate(scope) as unknown;
      if (typeof v !== 'number' || !Number.isFinite(v)) throw new DerivedEvaluationError(`${definition.name}: the ${what} ${i} is not finite at these values`);
      out[i] = v;
    });
    return out;
  };

  return {
    name: definition.name,
    unit: definition.unit ?? null,
    expression: text,
    inputs,
    model(arrays, out) {
      if (arrays.length !== p) throw new RangeError(`${definition.name}: the model takes ${p} input arrays, got ${arrays.length}`);
      for (let r = 0; r < out.length; r++) {
        for (let i = 0; i < p; i++) scope.set(symbols[i] as string, (arrays[i] as Float64Array)[r] as number);
        const result = run();
        out[r] = result.ok ? result.value : Number.NaN;
      }
    },
    evaluate(values) {
      const result = evaluateSafely(values);
      if (!result.ok) throw new DerivedEvaluationError(`${definition.name}: ${result.reason}`);
      return result.value;
    },
    evaluateSafely,
    sensitivities(values) {
      return evaluateDerivatives(sensitivityFunctions, values, 'sensitivity coefficient');
    },
    higherDerivatives(values) {
      if (higher === null) {
        const second: EvalFunction[] = [];
        const third: EvalFunction[] = [];
        for (let i = 0; i < p; i++) {
          for (let j = 0; j < p; j++) {
            const dij = differentiate(firstDerivatives[i] as MathNode, symbols[j] as string);
            second.push(dij.compile());
            third.push(differentiate(dij, symbols[j] as string).compile());
          }
        }
        higher = { second, third };
      }
      return {
        second: evaluateDerivatives(higher.second, values, 'second derivative'),
        third: evaluateDerivatives(higher.third, values, 'third derivative'),
      };
    },
  };
}
