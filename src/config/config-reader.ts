import { PlateauError } from '../errors/catalogue.js';

/**
 * A small reader for configuration objects that collects one clear line per problem, naming the
 * key path and what was expected ("channels.defaults.confidence: expected a number between 0 and 1,
 * got 1.5"), instead of stopping at the first.
 */
export class ConfigError extends PlateauError {
  readonly problems: string[];
  constructor(problems: string[]) {
    super('ERR_CONFIG', { detail: problems.join('\n') });
    this.name = 'ConfigError';
    this.problems = problems;
  }
}

export type Plain = Record<string, unknown>;

export class ConfigReader {
  readonly problems: string[] = [];

  problem(path: string, message: string): void {
    this.problems.push(`${path}: ${message}`);
  }

  /** The object at `path`, or an empty one (with a problem) if it is something else. Unknown keys are problems. */
  section(value: unknown, path: string, known: string[]): Plain {
    if (value === undefined || value === null) return {};
    if (typeof value !== 'object' || Array.isArray(value)) {
      this.problem(path, `expected a mapping of keys, got ${describe(value)}`);
      return {};
    }
    const plain = value as Plain;
    for (const key of Object.keys(plain)) {
      if (!known.includes(key)) this.problem(join(path, key), `unknown key (expected one of ${known.join(', ')})`);
    }
    return plain;
  }

  list(value: unknown, path: string): unknown[] {
    if (value === undefined || value === null) return [];
    if (!Array.isArray(value)) {
      this.problem(path, `expected a list, got ${describe(value)}`);
      return [];
    }
    return value;
  }

  number(object: Plain, key: string, path: string, options: { min?: number; max?: number; integer?: boolean; above?: number; below?: number }, fallback: number): number;
  number(object: Plain, key: string, path: string, options: { min?: number; max?: number; integer?: boolean; above?: number; below?: number }, fallback: null): number | null;
  number(object: Plain, key: string, path: string, options: { min?: number; max?: number; integer?: boolean; above?: number; below?: number }, fallback: number | null): number | null {
    const value = object[key];
    if (value === undefined || value === null) return fallback;
    const where = join(path, key);
    const expected = numberExpectation(options);
    if (typeof value !== 'number' || !Number.isFinite(value)) {
      this.problem(where, `expected ${expected}, got ${describe(value)}`);
      return fallback;
    }
    const { min, max, integer, above, below } = options;
    if ((integer && !Number.isInteger(value)) || (min !== undefined && value < min) || (max !== undefined && value > max) || (above !== undefined && value <= above) || (below !== undefined && value >= below)) {
      this.problem(where, `expected ${expected}, got ${value}`);
      return fallback;
    }
    return value;
  }

  string(object: Plain, key: string, path: string, fallback: string): string;
  string(object: Plain, key: string, path: string, fallback: null): string | null;
  string(object: Plain, key: string, path: string, fallback: string | null): string | null {
    const value = object[key];
    if (value === undefined || value === null) return fallback;
    if (typeof value !== 'string' || value.length === 0) {
      this.problem(join(path, key), `expected text, got ${describe(value)}`);
      return fallback;
    }
    return value;
  }

  boolean(object: Plain, key: string, path: string, fallback: boolean): boolean {
    const value = object[key];
    if (value === undefined || value === null) return fallback;
    if (typeof value !== 'boolean') {
      this.problem(join(path, key), `expected true or false, got ${describe(value)}`);
      return fallback;
    }
    return value;
  }

  oneOf<T extends string | number>(object: Plain, key: string, path: string, choices: readonly T[], fallback: T): T {
    const value = object[key];
    if (value === undefined || value === null) return fallback;
    if (!choices.includes(value as T)) {
      this.problem(join(path, key), `expected one of ${choices.join(', ')}, got ${describe(value)}`);
      return fallback;
    }
    return value as T;
  }

  require(object: Plain, key: string, path: string, what: string): boolean {
    if (object[key] === undefined || object[key] === null) {
      this.problem(join(path, key), `missing: ${what}`);
      return false;
    }
    return true;
  }

  throwIfProblems(): void {
    if (this.problems.length > 0) throw new ConfigError(this.problems);
  }
}

export function join(path: string, key: string | number): string {
  if (typeof key === 'number') return `${path}[${key}]`;
  return path ? `${path}.${key}` : key;
}

function numberExpectation(options: { min?: number; max?: number; integer?: boolean; above?: number; below?: number }): string {
  const kind = options.integer ? 'a whole number' : 'a number';
  const parts: string[] = [];
  if (options.above !== undefined) parts.push(`above ${options.above}`);
  if (options.min !== undefined) parts.push(`at least ${options.min}`);
  if (options.below !== undefined) parts.push(`below ${options.below}`);
  if (options.max !== undefined) parts.push(`at most ${options.max}`);
  if (options.above !== undefined && options.below !== undefined) return `${kind} between ${options.above} and ${options.below}`;
  return parts.length ? `${kind} ${parts.join(' and ')}` : kind;
}

export function describe(value: unknown): string {
  if (value === null) return 'null';
  if (Array.isArray(value)) return 'a list';
  if (typeof value === 'string') return `"${value.length > 40 ? `${value.slice(0, 40)}...` : value}"`;
  if (typeof value === 'object') return 'a mapping';
  return String(value);
}
