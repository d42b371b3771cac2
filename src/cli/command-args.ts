import { parseArgs } from 'node:util';
import { UsageError } from './cli-error.js';

/** An option of a command: a flag (boolean) or one taking a value (string), perhaps repeatable. */
export interface OptionSpec {
  type: 'boolean' | 'string';
  short?: string;
  multiple?: boolean;
}

export type OptionSpecs = Record<string, OptionSpec>;

export interface ParsedArgs {
  values: Record<string, string | boolean | string[] | undefined>;
  positionals: string[];
}

/**
 * Reads a command's arguments with node's parser, in our own words: an unknown option, a value
 * missing or given to a flag, and an unexpected argument each get one line naming the command,
 * the option and where to look (`plateau help COMMAND`), with the closest option name when one
 * is near. A value starting with "-" (a negative number: `--target -1`) is taken as the value of
 * the option before it unless it is itself an option of the command, so that the option's own
 * check can say what is expected instead of the parser calling it ambiguous.
 */
export function readCommandArgs(command: string, argv: string[], options: OptionSpecs, allowPositionals: boolean): ParsedArgs {
  const joined: string[] = [];
  const known = new Set(Object.entries(options).flatMap(([name, spec]) => [`--${name}`, ...(spec.short ? [`-${spec.short}`] : [])]));
  for (let i = 0; i < argv.length; i++) {
    const arg = argv[i] as string;
    const name = arg.startsWith('--') ? arg.slice(2) : null;
    const next = argv[i + 1];
    if (name !== null && !name.includes('=') && options[name]?.type === 'string' && next !== undefined && next.startsWith('-') && next !== '--' && !known.has(next.split('=')[0] as string)) {
      joined.push(`--${name}=${next}`);
      i++;
    } else joined.push(arg);
  }
  const see = `(plateau help ${command} lists the options)`;
  try {
    const { values, positionals } = parseArgs({ args: joined, options, allowPositionals, strict: true });
    return { values: values as ParsedArgs['values'], positionals };
  } catch (error) {
    const code = (error as { code?: string }).code ?? '';
    const message = (error as Error).message;
    const option = /'(-{1,2}[^' =]+)/.exec(message)?.[1] ?? '';
    if (code === 'ERR_PARSE_ARGS_UNKNOWN_OPTION') {
      const near = closest(option.replace(/^-+/, ''), Object.keys(options));
      throw new UsageError(`${command}: unknown option ${option}${near ? ` (did you mean --${near}?)` : ''} ${see}`);
    }
    if (code === 'ERR_PARSE_ARGS_INVALID_OPTION_VALUE') {
      const name = option.replace(/^-+/, '');
      const spec = options[name] ?? Object.entries(options).find(([, s]) => s.short === name)?.[1];
      const long = options[name] ? `--${name}` : `--${Object.entries(options).find(([, s]) => s.short === name)?.[0] ?? name}`;
      if (spec?.type === 'boolean') throw new UsageError(`${command}: ${long} takes no value ${see}`);
      throw new UsageError(`${command}: ${long} needs a value ${see}`);
    }
    if (code === 'ERR_PARSE_ARGS_UNEXPECTED_POSITIONAL') {
      const extra = /'([^']*)'/.exec(message)?.[1];
      throw new UsageError(`${command}: unexpected argument${extra ? ` "${extra}"` : ''} ${see}`);
    }
    throw new UsageError(`${command}: ${message.split('\n')[0]} ${see}`);
  }
}

/** The option name nearest to a misspelt one (edit distance at most 2, or a prefix), if any. */
function closest(word: string, names: string[]): string | null {
  let best: string | null = null;
  let bestDistance = 3;
  for (const name of names) {
    const d = name.startsWith(word) && word.length >= 3 ? 1 : distance(word, name);
    if (d < bestDistance) {
      best = name;
      bestDistance = d;
    }
  }
  return best;
}

function distance(a: string, b: string): number {
  const row = Array.from({ length: b.length + 1 }, (_, j) => j);
  for (let i = 1; i <= a.length; i++) {
    let previous = row[0] as number;
    row[0] = i;
    for (let j = 1; j <= b.length; j++) {
      const current = row[j] as number;
      row[j] = Math.min((row[j] as number) + 1, (row[j - 1] as number) + 1, previous + (a[i - 1] === b[j - 1] ? 0 : 1));
      previous = current;
    }
  }
  return row[b.length] as number;
}
