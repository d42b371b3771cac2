import { readFileSync } from 'node:fs';
import { UsageError } from './cli-error.js';
import { errorEntry } from '../errors/catalogue.js';
import { runAnalyze, ANALYZE_HELP } from './analyze.js';
import { RUN_HELP, DEMO_HELP } from './daemon-help.js';

const HELP = `plateau: live steady-state and uncertainty of windowed means for test and calibration rigs

Usage:
  plateau demo [options]            embedded broker + simulated rig + daemon + dashboard
  plateau run --config FILE         the daemon: MQTT streams in, verdicts out
  plateau analyze FILE [options]    replay a logged CSV file through the same engine
  plateau help [command]            this text, or a command's own help and options
  plateau version                   the version

Each command's options: plateau help demo, plateau help run, plateau help analyze
(or plateau COMMAND --help).
`;

/** Each command's own help text. */
const COMMAND_HELP: Record<string, string> = { analyze: ANALYZE_HELP, run: RUN_HELP, demo: DEMO_HELP };

interface Commands {
  [name: string]: (argv: string[]) => Promise<number>;
}

/** Runs the command line; returns the exit status. The only place that turns errors into text. */
export async function main(argv: string[], extra: Commands = {}): Promise<number> {
  const out = (text: string) => process.stdout.write(text);
  const [command, ...rest] = argv;
  try {
    switch (command) {
      case 'analyze':
        return await runAnalyze(rest, { out });
      case 'run':
        // The daemon's modules (broker, store, server) load only for the commands that use them.
        return await (await import('./run.js')).runDaemonCommand(rest);
      case 'demo':
        return await (await import('./demo.js')).runDemoCommand(rest);
      case 'help': {
        const topic = rest[0];
        if (topic === undefined) {
          out(HELP);
          return 0;
        }
        const text = COMMAND_HELP[topic];
        if (text === undefined) throw new UsageError(`help: no command "${topic}" (commands: ${Object.keys(COMMAND_HELP).join(', ')}, help, version)`);
        out(text);
        return 0;
      }
      case undefined:
      case '--help':
      case '-h':
        out(HELP);
        return command === undefined ? 2 : 0;
      case 'version':
      case '--version':
        out(`${version()}\n`);
        return 0;
      default: {
        const handler = extra[command];
        if (handler) return await handler(rest);
        throw new UsageError(`unknown command "${command}" (try: plateau help)`);
      }
    }
  } catch (error) {
    return reportError(error);
  }
}

/**
 * The exit status of an error and how it is printed: a catalogue error (src/errors/catalogue.ts)
 * has its exit status there (2 for what the user can fix, 70 for the rest); node's own argument
 * errors (ERR_PARSE_ARGS_*) and a port that is taken or not allowed (EADDRINUSE, EACCES) are the
 * user's too; anything else is an internal error (its stack with PLATEAU_DEBUG=1).
 */
export function reportError(error: unknown): number {
  const err = error as { code?: string; message?: string };
  const code = typeof err?.code === 'string' ? err.code : '';
  const entry = errorEntry(code);
  const user = entry !== undefined ? entry.exit === 2 : code.startsWith('ERR_PARSE_ARGS') || code === 'EADDRINUSE' || code === 'EACCES';
  // A configuration error carries one line per problem; everything else is one line.
  const lines = code.startsWith('ERR_CONFIG') ? (err.message ?? '').split('\n') : [(err?.message ?? String(error)).split('\n')[0]];
  for (const line of lines) process.stderr.write(`plateau: ${user ? '' : 'internal error: '}${line}\n`);
  if (!user && process.env.PLATEAU_DEBUG) process.stderr.write(`${(error as Error).stack}\n`);
  return user ? 2 : 70;
}

function version(): string {
  const pkg = JSON.parse(readFileSync(new URL('../../package.json', import.meta.url), 'utf8')) as { version: string };
  return `plateau ${pkg.version}`;
}
