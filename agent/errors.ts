/**
 * A mistake the user can fix (bad config, wrong file, impossible signal).
 * The CLI prints `what` and `hint` without a stack trace and exits non-zero.
 */
export class UserError extends Error {
  /** Where the problem is: a file, a config path, a channel. */
  readonly where: string;
  /** What to do about it. */
  readonly hint: string;
  /** Process exit code the CLI uses for this error. */
  readonly exitCode: number;

  constructor(where: string, what: string, hint: string, exitCode = 2) {
    super(`${where}: ${what}`);
    this.name = 'UserError';
    this.where = where;
    this.hint = hint;
    this.exitCode = exitCode;
  }

  /** One or two lines fit for a terminal. */
  format(): string {
    return this.hint ? `${this.message}\n  -> ${this.hint}` : this.message;
  }
}

export function isUserError(e: unknown): e is UserError {
  return e instanceof UserError;
}
