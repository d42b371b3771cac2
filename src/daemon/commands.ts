import type { Logger } from 'pino';
import type { TestPointControl } from './test-point-control.js';

/**
 * Commands from a rig sequencer on `<topics.command>/<action>` (JSON object payloads):
 * `test-point/start` ({id?, name?, channels, derived?, setPoints?: {channel: number}}) and `test-point/stop` ({id}). Every refused
 * command raises a `command-refused` event naming the command and the reason, so that a sequencer
 * waiting on the event topic gets an answer: a payload that is not a JSON object (`reason`
 * "payload is not a JSON object", code ERR_COMMAND_PAYLOAD, also counted as a refused delivery
 * `unparseable`), an unknown action (ERR_COMMAND_UNKNOWN, counted as `unknown-topic`), and what the
 * daemon refuses (an unknown test point, a failing store: the error's own code), also logged.
 */
export interface CommandsOptions {
  testPoints: TestPointControl;
  log: Logger;
  rejected(reason: 'unparseable' | 'unknown-topic', detail: string): void;
  raise(source: string, kind: string, at: number | null, body: Record<string, unknown>): void;
}

export class Commands {
  count = 0;
  private readonly options: CommandsOptions;

  constructor(options: CommandsOptions) {
    this.options = options;
  }

  handle(action: string, payload: Uint8Array): void {
    this.count++;
    let body: Record<string, unknown>;
    try {
      const text = Buffer.from(payload.buffer, payload.byteOffset, payload.byteLength).toString('utf8');
      const parsed: unknown = text.trim() === '' ? {} : JSON.parse(text);
      if (typeof parsed !== 'object' || parsed === null || Array.isArray(parsed)) throw new Error('not an object');
      body = parsed as Record<string, unknown>;
    } catch {
      const command = action.slice(0, 80);
      this.options.rejected('unparseable', `command ${command}: payload is not a JSON object`);
      this.options.raise('daemon', 'command-refused', null, { command, reason: 'payload is not a JSON object', code: 'ERR_COMMAND_PAYLOAD' });
      return;
    }
    try {
      if (action === 'test-point/start') {
        this.options.testPoints.start({
          ...(typeof body.id === 'string' ? { id: body.id } : {}),
          ...(typeof body.name === 'string' ? { name: body.name } : {}),
          channels: Array.isArray(body.channels) ? (body.channels as string[]) : [],
          derived: Array.isArray(body.derived) ? (body.derived as string[]) : [],
          ...(body.setPoints !== undefined ? { setPoints: body.setPoints as Record<string, number> } : {}),
        });
      } else if (action === 'test-point/stop') {
        this.options.testPoints.stop(String(body.id ?? ''));
      } else {
        const command = action.slice(0, 80);
        this.options.rejected('unknown-topic', `command ${command}: unknown command (test-point/start, test-point/stop)`);
        this.options.raise('daemon', 'command-refused', null, { command, reason: 'unknown command (test-point/start, test-point/stop)', code: 'ERR_COMMAND_UNKNOWN' });
      }
    } catch (err) {
      this.options.log.warn({ command: action, err }, 'command refused');
      this.options.raise('daemon', 'command-refused', null, { command: action, reason: (err as Error).message, ...(typeof (err as { code?: unknown }).code === 'string' ? { code: (err as { code: string }).code } : {}) });
    }
  }
}
