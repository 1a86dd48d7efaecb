import { basename, dirname, join } from 'node:path';

/** The folder, beside damaged state files, that keeps them for inspection. */
export const QUARANTINE_DIR = 'quarantine';

/**
 * Where a damaged state file is moved instead of being deleted or stopping the agent:
 * `<its directory>/quarantine/<its name>.<UTC time with ':' and '.' as '-'>`, so a later damaged
 * copy never overwrites an earlier one. Used by the outbox (records) and the watcher (state,
 * baseline, history).
 */
export function quarantinePath(file: string, nowMs: number): string {
  return join(
    dirname(file),
    QUARANTINE_DIR,
    `${basename(file)}.${new Date(nowMs).toISOString().replace(/[:.]/g, '-')}`,
  );
}
