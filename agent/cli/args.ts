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
