import { readFileSync, statSync } from 'node:fs';
import { inspect } from 'node:util';
import { UserError } from '../errors.js';

/**
 * A secret value (password, command token, private key) that never prints: JSON, string
 * conversion and util.inspect all give "[redacted]", so a log line or an error that includes the
 * settings object by mistake cannot leak it. `reveal()` is the only way to the value.
 */
export class Secret {
  readonly #value: Buffer;
  constructor(value: Buffer | string) {
    this.#value = Buffer.isBuffer(value) ? Buffer.from(value) : Buffer.from(value, 'utf8');
  }
  reveal(): Buffer {
    return this.#value;
  }
  toString(): string {
    return '[redacted]';
  }
  toJSON(): string {
    return '[redacted]';
  }
  [inspect.custom](): string {
    return '[redacted]';
  }
}

export interface SecretRef {
  readonly file?: string;
  readonly env?: string;
}

/**
 * Reads a file that holds a secret, refusing one that group or others may read or write: the
 * agent should not depend on a secret anyone on the board can copy.
 */
export function readSecretFile(file: string, where: string): Buffer {
  let st;
  try {
    st = statSync(file);
  } catch (e) {
    const code = (e as NodeJS.ErrnoException).code;
    throw new UserError(
      where,
      `cannot read secret file ${file} (${code === 'ENOENT' ? 'not found' : code})`,
      'check the path; relative paths are taken from the directory the agent starts in',
    );
  }
  if (!st.isFile())
    throw new UserError(
      where,
      `${file} is not a regular file`,
      'point it at the file that holds the secret',
    );
  const mode = st.mode & 0o777;
  if (mode & 0o077) {
    throw new UserError(
      where,
      `secret file ${file} is open to group or others (mode ` +
        `${mode.toString(8).padStart(4, '0')}); refusing to use it`,
      `run: chmod 600 ${file}   (and chown it to the user the agent runs as)`,
    );
  }
  try {
    return readFileSync(file);
  } catch (e) {
    throw new UserError(
      where,
      `cannot read secret file ${file} (${(e as NodeJS.ErrnoException).code})`,
      'make it readable by the user the agent runs as',
    );
  }
}

/** Resolves a `{file}` or `{env}` reference to a one-line secret (trailing newline removed). */
export function resolveSecret(
  ref: SecretRef,
  where: string,
  env: NodeJS.ProcessEnv = process.env,
): Secret {
  let text: string;
  if (ref.file) {
    text = readSecretFile(ref.file, `${where}.file`)
      .toString('utf8')
      .replace(/\r?\n$/, '');
  } else if (ref.env) {
    const v = env[ref.env];
    if (v === undefined || v === '')
      throw new UserError(
        `${where}.env`,
        `environment variable ${ref.env} is not set or empty`,
        `set ${ref.env} in the service environment (e.g. ` +
          `an EnvironmentFile= readable by root only)`,
      );
    text = v;
  } else {
    throw new UserError(
      where,
      'names neither a file nor an environment variable',
      'give file: PATH or env: NAME',
    );
  }
  if (text.length === 0)
    throw new UserError(
      where,
      'the secret is empty',
      'put the secret on the first line of the file',
    );
  if (text.includes('\n'))
    throw new UserError(where, 'the secret spans several lines', 'put the secret on a single line');
  return new Secret(text);
}
