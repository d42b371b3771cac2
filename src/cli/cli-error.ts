import { PlateauError } from '../errors/catalogue.js';

/** An error the user can fix: printed as one line, exit status 2, never a stack trace. */
export class UsageError extends PlateauError {
  constructor(message: string) {
    super('ERR_USAGE', { detail: message });
    this.name = 'UsageError';
  }
}
