/** An error the user can fix: printed as one line, exit status 2, never a stack trace. */
export class UsageError extends Error {
  readonly code = 'ERR_USAGE';
}
