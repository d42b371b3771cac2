import { spawnSync } from 'node:child_process';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { ROOT } from './reference.js';

/** Runs the built command line (`npm test` builds dist/ first). */
export function runCli(args: string[], options: { input?: string; timeoutMs?: number } = {}) {
  const result = spawnSync(process.execPath, [join(ROOT, 'bin', 'plateau.js'), ...args], {
    encoding: 'utf8',
    timeout: options.timeoutMs ?? 60_000,
    ...(options.input !== undefined ? { input: options.input } : {}),
  });
  return { status: result.status, stdout: result.stdout, stderr: result.stderr };
}

export function tempFile(name: string, content: string): string {
  const dir = mkdtempSync(join(tmpdir(), 'plateau-test-'));
  const path = join(dir, name);
  writeFileSync(path, content);
  return path;
}

/** Every number in a parsed JSON value is finite (JSON cannot carry NaN, but a string "NaN" could sneak in). */
export function assertNoNonFinite(value: unknown, path = '$'): void {
  if (typeof value === 'number' && !Number.isFinite(value)) throw new Error(`${path} is ${value}`);
  if (typeof value === 'string' && /^(NaN|-?Infinity)$/.test(value)) throw new Error(`${path} is the string ${value}`);
  if (Array.isArray(value)) value.forEach((v, i) => assertNoNonFinite(v, `${path}[${i}]`));
  else if (value && typeof value === 'object') for (const [k, v] of Object.entries(value)) assertNoNonFinite(v, `${path}.${k}`);
}
