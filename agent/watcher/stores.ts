import { join } from 'node:path';
import { z } from 'zod';
import type { StoredCoefficients } from '../balance/coefficients.js';
import { storedCoefficientsSchema } from '../balance/job-input.js';
import { formatIssues } from '../config/load.js';
import type { Baseline } from './baseline.js';
import {
  DamagedFileError,
  moveAside,
  parseJsonFile,
  readTextOrNull,
  removeFile,
  writeFileAtomic,
} from './files.js';
import { snapshotFileSchema, type WatcherSnapshot } from './state-table.js';

/**
 * The watcher's persistent state sits behind these interfaces; the file implementations keep it
 * under `<state_dir>/watcher/` (and read balancing results from `<state_dir>/balance/`).
 */

/** A stored file that can be moved aside when it turns out to be damaged. */
export interface Quarantinable {
  /**
   * Moves the damaged stored file to `quarantine/` beside it, named with the time `nowMs`; returns
   * where it went, or null when it could not be moved.
   */
  quarantine(nowMs: number): string | null;
}

export interface BaselineStore extends Quarantinable {
  /** Throws DamagedFileError when a stored baseline exists but cannot be read or understood. */
  load(): Baseline | null;
  save(b: Baseline): void;
  /** Returns false when there was nothing to clear. */
  clear(): boolean;
}

export type SpeedState = 'in_range' | 'low' | 'high';

/**
 * What the watcher has confirmed and reported (state.json), derived from STATE_ROWS in
 * state-table.ts.
 */
export type { WatcherSnapshot };

export interface WatcherStateStore extends Quarantinable {
  /** Throws DamagedFileError when a stored state exists but cannot be read or understood. */
  load(): WatcherSnapshot | null;
  save(s: WatcherSnapshot): void;
}

/** Where stored influence coefficients come from; null when no balancing job saved any. */
export interface CoefficientsSource {
  load(): StoredCoefficients | null;
}

function validate<T>(schema: z.ZodType<T, unknown>, file: string, text: string, fix: string): T {
  const raw = parseJsonFile(file, text);
  const res = schema.safeParse(raw);
  if (!res.success)
    throw new DamagedFileError(
      file,
      `unexpected contents:\n  ${formatIssues(file, res.error.issues, raw).join('\n  ')}`,
      fix,
    );
  return res.data;
}

const zone = z.enum(['A', 'B', 'C', 'D']);
const baselineFileSchema = z.object({
  version: z.literal(1),
  asset: z.string(),
  source: z.enum(['learned', 'config']),
  learned_at: z.string().nullable(),
  windows: z.number().int().min(0),
  speed_rpm: z.number().nullable(),
  channels: z.record(
    z.string(),
    z.object({
      one_x_rms_mm_s: z.number().min(0),
      one_x_phase_deg: z.number(),
      overall_rms_mm_s: z.number().nullable(),
    }),
  ),
});
export function watcherDir(stateDir: string): string {
  return join(stateDir, 'watcher');
}

export class FileBaselineStore implements BaselineStore {
  readonly file: string;
  constructor(stateDir: string) {
    this.file = join(watcherDir(stateDir), 'baseline.json');
  }
  load(): Baseline | null {
    const text = readTextOrNull(this.file);
    return text === null
      ? null
      : validate(
          baselineFileSchema,
          this.file,
          text,
          'learn the baseline again (`turnwise condition clear-baseline` ' +
            'removes this file; `turnwise run` moves it to quarantine/)',
        );
  }
  quarantine(nowMs: number): string | null {
    return moveAside(this.file, nowMs);
  }
  save(b: Baseline): void {
    writeFileAtomic(this.file, JSON.stringify(b, null, 2) + '\n');
  }
  clear(): boolean {
    return removeFile(this.file);
  }
}

export class FileWatcherStateStore implements WatcherStateStore {
  readonly file: string;
  constructor(stateDir: string) {
    this.file = join(watcherDir(stateDir), 'state.json');
  }
  load(): WatcherSnapshot | null {
    const text = readTextOrNull(this.file);
    return text === null
      ? null
      : validate(
          snapshotFileSchema as unknown as z.ZodType<WatcherSnapshot>,
          this.file,
          text,
          '`turnwise run` moves it to quarantine/ and starts afresh (the ' +
            'current zones and states are reported again); or delete it',
        );
  }
  quarantine(nowMs: number): string | null {
    return moveAside(this.file, nowMs);
  }
  save(s: WatcherSnapshot): void {
    writeFileAtomic(this.file, JSON.stringify(s) + '\n');
  }
}

export class FileCoefficientsSource implements CoefficientsSource {
  readonly file: string;
  constructor(stateDir: string) {
    this.file = join(stateDir, 'balance', 'coefficients.json');
  }
  load(): StoredCoefficients | null {
    const text = readTextOrNull(this.file);
    return text === null
      ? null
      : validate(
          storedCoefficientsSchema as z.ZodType<StoredCoefficients>,
          this.file,
          text,
          'save the balancing job again, or delete the file',
        );
  }
}
