import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { loadConfig } from '../config/load.js';
import type { Config } from '../config/schema.js';
import { isUserError, UserError } from '../errors.js';
import { writeFileAtomic } from '../watcher/files.js';

/**
 * What happens when the config on the board is broken (someone edited /etc/turnwise/turnwise.yaml
 * and made a mistake): the fan must not be left unwatched, and the mistake must be loud.
 *
 * - A config is "good" once the agent has measured with it: at its first analysis window the file
 *   is copied to the last-good file (atomically, fsynced; `keepLastGood`). A config that loads but
 *   cannot start the agent (a token file missing, a recording not found) never becomes last-good.
 * - A config that does not load, or that loads but fails at start-up before the first window, when
 *   a last-good copy exists that differs from it: the agent runs on the last-good copy, logs the
 *   error at error priority (journal) and publishes a `config_rejected` alarm event, so the plant
 *   sees both that monitoring continues and that the new config was refused.
 * - No last-good copy (first start), or the last-good copy is the failing config itself: the agent
 *   exits with the error; systemd restarts it and the journal shows the error at every attempt.
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

/** Loads `file`, or falls back to the last-good copy when `file` does not load (see above). */
export function loadGuardedConfig(file: string, lastGood: string): GuardedConfig {
  try {
    return { config: loadConfig(file), from: file };
  } catch (e) {
    if (!isUserError(e)) throw e;
    const fallback = fallbackConfig(file, lastGood, e);
    // no usable last-good copy: the original error is what the user must see
    if (!fallback) throw e;
    return fallback;
  }
}

/**
 * The last-good copy to run on after `file` failed with `error`, or null when there is none, it
 * does not load, or it is the same text as `file` (falling back would fail the same way).
 */
export function fallbackConfig(
  file: string,
  lastGood: string,
  error: UserError,
): GuardedConfig | null {
  let text: string;
  try {
    text = readFileSync(lastGood, 'utf8');
  } catch {
    return null;
  }
  try {
    if (readFileSync(file, 'utf8') === text) return null;
  } catch {
    // the given file is unreadable: the copy is different by definition
  }
  try {
    return { config: loadConfig(lastGood), from: lastGood, rejected: error };
  } catch {
    return null;
  }
}

/**
 * Keeps `file` as the last-good config: call it once the agent has measured with it. Failing to
 * keep the copy is reported to `onError` and never stops monitoring.
 */
export function keepLastGood(file: string, lastGood: string, onError: (e: Error) => void): void {
  try {
    // Readable by the service user only: a config may name secrets' files and the broker's address.
    writeFileAtomic(lastGood, readFileSync(file, 'utf8'), 0o600);
  } catch (e) {
    onError(e as Error);
  }
}
