import { parseArgs, type ParseArgsConfig } from 'node:util';
import { UserError } from '../errors.js';

/** node:util parseArgs with errors turned into a UserError that shows the usage. */
export function parseCommandArgs<T extends NonNullable<ParseArgsConfig['options']>>(
  command: string,
  usage: string,
  argv: string[],
  options: T,
) {
  try {
    return parseArgs({ args: argv, options, allowPositionals: true, strict: true });
  } catch (e) {
    throw new UserError(`turnwise ${command}`, (e as Error).message, `usage: ${usage}`);
  }
}

/**
 * A numeric option: undefined when absent, else a finite number that passes `check`, or a UserError
 * naming the option.
 */
export function numberOption(
  command: string,
  usage: string,
  name: string,
  raw: string | undefined,
  check: (v: number) => boolean,
  what: string,
): number | undefined {
  if (raw === undefined) return undefined;
  const v = Number(raw);
  if (raw.trim() === '' || !Number.isFinite(v) || !check(v))
    throw new UserError(
      `turnwise ${command} --${name}`,
      `expected ${what}, got "${raw}"`,
      `usage: ${usage}`,
    );
  return v;
}
