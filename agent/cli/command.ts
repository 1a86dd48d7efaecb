/** A CLI sub-command. `run` returns the process exit code; user mistakes throw UserError. */
export interface Command {
  readonly name: string;
  /** Usage text shown by `turnwise help NAME` and on a usage error. */
  readonly usage: string;
  run(argv: string[]): Promise<number>;
}

/**
 * A sub-command as `turnwise help` lists it: name and summary without loading the command's
 * module, which is imported (with its dependencies: zod, mqtt, aedes, serialport...) only when the
 * command runs or its usage is asked for.
 */
export interface CommandEntry {
  readonly name: string;
  /** One line for `turnwise help`. */
  readonly summary: string;
  load(): Promise<Command>;
}
