import { mkdirSync, openSync, closeSync, fsyncSync, readFileSync, renameSync, writeFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { loadConfig } from '../config/load.js';
import type { Config } from '../config/schema.js';
import { isUserError, UserError } from '../errors.js';

/**
 * What happens when the config on the board is broken (someone edited /etc/turnwise/turnwise.yaml
 * and made a mistake): the fan must not be left unwatched, and the mistake must be loud.
 *
 * - A config that loads is copied to the last-good file (atomically, fsynced) and used.
 * - A config that does not load, when a last-good copy exists: the agent runs on the last-good copy,
 *   logs the error at error priority (journal) and publishes a `config_rejected` alarm event, so the
 *   plant sees both that monitoring continues and that the new config was refused.
 * - No last-good copy (first start): the agent exits with the error; systemd restarts it and the
 *   journal shows the error at every attempt.
 */
export interface GuardedConfig {
  readonly config: Config;
  /** The file the config came from: the given one, or the last-good copy. */
  readonly from: string;
  /** The error that made the agent fall back; undefined when the given file loaded. */
  readonly rejected?: UserError;
}

/** Default place of the last-good copy: systemd's $STATE_DIRECTORY when set, else ./state. */
export function defaultLastGoodPath(env: NodeJS.ProcessEnv = process.env): string {
  const dir = env['STATE_DIRECTORY']?.split(':')[0] || 'state';
  return join(dir, 'last-good-config.yaml');
}

function writeAtomic(file: string, text: string): void {
  mkdirSync(dirname(file), { recursive: true });
  const tmp = `${file}.tmp`;
  writeFileSync(tmp, text, { mode: 0o600 });
  const fd = openSync(tmp, 'r');
  try {
    fsyncSync(fd);
  } finally {
    closeSync(fd);
  }
  renameSync(tmp, file);
  const dfd = openSync(dirname(file), 'r');
  try {
    fsyncSync(dfd);
  } finally {
    closeSync(dfd);
  }
}

export function loadGuardedConfig(file: string, lastGood: string): GuardedConfig {
  try {
    const config = loadConfig(file);
    try {
      writeAtomic(lastGood, readFileSync(file, 'utf8'));
    } catch {
      // Keeping the copy is a convenience; failing to keep it must not stop monitoring.
    }
    return { config, from: file };
  } catch (e) {
    if (!isUserError(e)) throw e;
    let config: Config;
    try {
      config = loadConfig(lastGood);
    } catch {
      throw e; // no usable last-good copy: the original error is what the user must see
    }
    return { config, from: lastGood, rejected: e };
  }
}
