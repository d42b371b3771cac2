import { spawn, type ChildProcess } from 'node:child_process';
import { openSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { stringify } from 'yaml';
import { ROOT } from './reference.js';

/** A daemon in its own process (`plateau run --config`), so a test can kill it with SIGKILL. */
export interface DaemonProcess {
  child: ChildProcess;
  url: string;
  stderr: () => string;
}

export async function startDaemonProcess(dir: string, config: Record<string, unknown>, name = 'daemon.yaml', logFile?: string): Promise<DaemonProcess> {
  const file = join(dir, name);
  writeFileSync(file, stringify(config));
  // The log (stdout) is dropped, or appended to `logFile`.
  const stdout = logFile === undefined ? 'ignore' : openSync(logFile, 'a');
  const child = spawn(process.execPath, [join(ROOT, 'bin', 'plateau.js'), 'run', '--config', file], { stdio: ['ignore', stdout, 'pipe'] });
  let text = '';
  child.stderr?.on('data', (chunk: Buffer) => {
    text += chunk.toString();
  });
  const url = await new Promise<string>((resolve, reject) => {
    const timer = setTimeout(() => reject(new Error(`daemon did not start: ${text}`)), 20_000);
    const check = () => {
      const match = /dashboard at (http:\/\/[^\s]+)/.exec(text);
      if (match) {
        clearTimeout(timer);
        resolve(match[1] as string);
      }
    };
    child.stderr?.on('data', check);
    child.once('exit', (code) => {
      clearTimeout(timer);
      reject(new Error(`daemon exited with ${code}: ${text}`));
    });
  });
  return { child, url, stderr: () => text };
}

export async function getJson<T>(url: string): Promise<T> {
  const response = await fetch(url);
  return (await response.json()) as T;
}

export function killHard(processHandle: DaemonProcess): Promise<void> {
  return new Promise((resolve) => {
    processHandle.child.once('exit', () => resolve());
    processHandle.child.kill('SIGKILL');
  });
}
