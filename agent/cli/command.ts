/** A CLI sub-command. `run` returns the process exit code; user mistakes throw UserError. */
export interface Command {
  readonly name: string;
  /** One line for `turnwise help`. */
  readonly summary: string;
  /** Usage text shown by `turnwise help NAME` and on a usage error. */
  readonly usage: string;
  run(argv: string[]): Promise<number>;
}
