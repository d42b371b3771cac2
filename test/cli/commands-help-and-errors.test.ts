import { describe, expect, it } from 'vitest';
import { mkdtempSync, readdirSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { createServer } from 'node:net';
import { runCli, tempFile } from '../helpers/cli.js';
import { spawnSync } from 'node:child_process';
import { ROOT } from '../helpers/reference.js';

// The first hour at the command line: each command has its own help, and every mistake gets one
// line of our own naming the command, the option or the file (never the argument parser's text,
// never "internal error"), with exit status 2.

const csv = () => tempFile('bench.csv', 'time,probe_degC\n0,21.01\n1,21.02\n2,21.00\n3,21.03\n');

describe('plateau help', () => {
  it('plateau --help and plateau help: the commands only, and how to get a command\'s own help', () => {
    for (const args of [['--help'], ['help'], ['-h']]) {
      const r = runCli(args);
      expect(r.status).toBe(0);
      expect(r.stdout).toMatch(/plateau demo/);
      expect(r.stdout).toMatch(/plateau help analyze/);
      // analyze's options are not mixed into the general help
      expect(r.stdout).not.toMatch(/--target-rel/);
    }
  });

  it('help run and run --help: run\'s own text listing --config', () => {
    for (const args of [['help', 'run'], ['run', '--help'], ['run', '-h']]) {
      const r = runCli(args);
      expect(r.status).toBe(0);
      expect(r.stdout).toMatch(/^plateau run --config FILE/);
      expect(r.stdout).toMatch(/-c, --config FILE/);
      expect(r.stdout).not.toMatch(/--target-rel|--speed/);
    }
  });

  it('help demo and demo --help: demo\'s own options', () => {
    for (const args of [['help', 'demo'], ['demo', '--help']]) {
      const r = runCli(args);
      expect(r.status).toBe(0);
      expect(r.stdout).toMatch(/^plateau demo \[options\]/);
      expect(r.stdout).toMatch(/--keep-store/);
      expect(r.stdout).not.toMatch(/--target-rel|--config FILE/);
    }
  });

  it('help analyze and analyze --help: analyze\'s options', () => {
    for (const args of [['help', 'analyze'], ['analyze', '--help']]) {
      const r = runCli(args);
      expect(r.status).toBe(0);
      expect(r.stdout).toMatch(/^plateau analyze FILE \[options\]/);
      expect(r.stdout).toMatch(/--target-rel R/);
    }
  });

  it('help for a command that does not exist: one line, exit 2', () => {
    const r = runCli(['help', 'analyse']);
    expect(r.status).toBe(2);
    expect(r.stderr.trim()).toBe('plateau: help: no command "analyse" (commands: analyze, run, demo, help, version)');
  });
});

describe('plateau analyze: mistakes in our own words', () => {
  it('a directory: one line saying so, exit 2 (not an internal error)', () => {
    const dir = mkdtempSync(join(tmpdir(), 'plateau-dir-'));
    const r = runCli(['analyze', dir]);
    expect(r.status).toBe(2);
    expect(r.stderr.trim()).toBe(`plateau: ${dir}: is a directory; give a CSV file inside it`);
  });

  it('--target -1: the option\'s own check, not "ambiguous"', () => {
    const r = runCli(['analyze', csv(), '--target', '-1']);
    expect(r.status).toBe(2);
    expect(r.stderr.trim()).toBe('plateau: --target -1: expected a positive uncertainty in the channel units');
  });

  it('an unknown option: our line, with the nearest option when one is close', () => {
    const file = csv();
    const r = runCli(['analyze', file, '--bogus']);
    expect(r.status).toBe(2);
    expect(r.stderr.trim()).toBe('plateau: analyze: unknown option --bogus (plateau help analyze lists the options)');
    const typo = runCli(['analyze', file, '--taget', '0.1']);
    expect(typo.stderr.trim()).toBe('plateau: analyze: unknown option --taget (did you mean --target?) (plateau help analyze lists the options)');
    expect(`${r.stderr}${typo.stderr}`).not.toMatch(/positional argument|Unknown option/);
  });

  it('a value missing, a value given to a flag, an argument too many', () => {
    const file = csv();
    expect(runCli(['analyze', file, '--target']).stderr.trim()).toBe('plateau: analyze: --target needs a value (plateau help analyze lists the options)');
    expect(runCli(['analyze', file, '--json=yes']).stderr.trim()).toBe('plateau: analyze: --json takes no value (plateau help analyze lists the options)');
    const run = runCli(['run', 'config.yaml']);
    expect(run.status).toBe(2);
    expect(run.stderr.trim()).toBe('plateau: run: unexpected argument "config.yaml" (plateau help run lists the options)');
  });
});

describe('plateau run: a configuration with problems', () => {
  it('broker.url embedded and bad derived expressions: every problem, each naming the file, exit 2 without hanging', () => {
    const dir = mkdtempSync(join(tmpdir(), 'plateau-run-'));
    const file = join(dir, 'rig.yaml');
    writeFileSync(
      file,
      [
        'broker:',
        '  url: embedded',
        'subscriptions:',
        '  - topic: rig/x/+',
        '    channel: "x.{3}"',
        'store:',
        `  path: ${join(dir, 'rig.sqlite')}`,
        'http:',
        '  listen: 127.0.0.1:0',
        'derived:',
        '  - name: d1',
        '    expression: "x.a * (x.b - "',
        '  - name: d2',
        '    expression: "x.a / nope"',
        '  - name: d3',
        '    expression: "max(x.a, x.b)"',
        '',
      ].join('\n'),
    );
    const r = runCli(['run', '--config', file], { timeoutMs: 20_000 });
    expect(r.status).toBe(2);
    const lines = r.stderr.trim().split('\n');
    expect(lines).toHaveLength(3);
    expect(lines[0]).toMatch(new RegExp(`^plateau: ${file.replace(/[.*+?^${}()|[\]\\/]/g, '\\$&')}: derived\\[0\\]\\.expression: syntax error`));
    expect(lines[1]).toContain(`${file}: derived[1].expression: unknown channel 'nope'`);
    expect(lines[2]).toContain(`${file}: derived[2].expression: function 'max' is not allowed`);
    // Nothing was opened: no store file was made.
    expect(readdirSync(dir)).toEqual(['rig.yaml']);
  });

  it('a port that cannot be had after the embedded broker started: the broker is closed and the command ends', async () => {
    const blocker = createServer();
    await new Promise<void>((resolve) => blocker.listen(0, '127.0.0.1', resolve));
    const port = (blocker.address() as { port: number }).port;
    const dir = mkdtempSync(join(tmpdir(), 'plateau-run-'));
    const file = join(dir, 'rig.yaml');
    writeFileSync(file, ['broker:', '  url: embedded', 'subscriptions:', '  - topic: rig/x/+', '    channel: "x.{3}"', 'store:', `  path: ${join(dir, 'rig.sqlite')}`, 'http:', `  listen: 127.0.0.1:${port}`, 'log:', '  level: silent', ''].join('\n'));
    try {
      const r = runCli(['run', '--config', file], { timeoutMs: 20_000 });
      expect(r.status).toBe(2);
      expect(r.stderr).toMatch(/EADDRINUSE|in use/);
    } finally {
      blocker.close();
    }
  });
});

describe('plateau demo: what it leaves behind', () => {
  it('a clean banner (no log lines), the temporary store deleted on exit, kept with --keep-store', () => {
    for (const keep of [false, true]) {
      const scratch = mkdtempSync(join(tmpdir(), 'plateau-demo-tmp-'));
      const r = spawnSync(process.execPath, [join(ROOT, 'bin', 'plateau.js'), 'demo', '--seconds', '2', '--speed', '20', '--http-port', '0', '--broker-port', '0', ...(keep ? ['--keep-store'] : [])], {
        encoding: 'utf8',
        timeout: 60_000,
        env: { ...process.env, TMPDIR: scratch },
      });
      expect(r.status).toBe(0);
      expect(r.stdout).toMatch(/^plateau demo: simulated bench HX-7/);
      // Every banner line is ours: no structured log line ({"level":...}) among them.
      expect(r.stdout.split('\n').filter((line) => line.trim().startsWith('{'))).toEqual([]);
      expect(r.stdout).toMatch(keep ? /\(kept after exit\)/ : /temporary: deleted on exit/);
      const left = readdirSync(scratch);
      if (keep) {
        expect(left).toHaveLength(1);
        expect(readdirSync(join(scratch, left[0] as string)).sort()).toEqual(expect.arrayContaining(['hx7.sqlite', 'plateau-demo.log']));
      } else expect(left).toEqual([]);
    }
  });
});
