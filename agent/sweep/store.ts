import { mkdirSync, readdirSync, readFileSync, rmSync } from 'node:fs';
import { join } from 'node:path';
import { writeFileAtomic } from '../balance/store.js';
import type { SweepRecordJson } from './sweeps.js';

/**
 * Recorded sweeps on disk: one JSON file per run-up or coast-down under `state_dir/sweeps/`,
 * named by its id (`20261203T063000Z-down`: the time of its first point, to the second, and its
 * direction). Bounded in count and bytes, the oldest removed first; the reference sweeps (the one
 * `sweep.reference_id` names, or the first recorded in each direction) are never removed and do
 * not count against the bounds.
 */

export interface StoredSweep extends SweepRecordJson {
  readonly id: string;
  readonly asset: string;
  /** Wall-clock time of the first and last points, ISO 8601 UTC. */
  readonly ts: string;
  readonly end_ts: string;
  readonly sample_rate_hz: number;
  /**
   * True for the sweep new ones of its direction are compared with (when sweep.reference_id names
   * none).
   */
  readonly reference: boolean;
  /** The reference this sweep was compared with (null: none yet, it became the reference). */
  readonly compared_with: string | null;
}

/** What the list shows without reading every point. */
export interface SweepIndexEntry {
  readonly id: string;
  readonly direction: 'up' | 'down';
  readonly bytes: number;
  readonly reference: boolean;
}

const ID_RE = /^[0-9]{8}T[0-9]{6}Z-(up|down)(-[0-9]+)?$/;

export function isSweepId(id: string): boolean {
  return ID_RE.test(id);
}

export function directionOfId(id: string): 'up' | 'down' | null {
  const m = /-(up|down)(-[0-9]+)?$/.exec(id);
  return m ? (m[1] as 'up' | 'down') : null;
}

export class SweepStore {
  readonly dir: string;
  private index: SweepIndexEntry[] = [];
  removed = 0;

  constructor(
    stateDir: string,
    private readonly bounds: {
      readonly maxCount: number;
      readonly maxBytes: number;
      readonly referenceId?: string;
    },
  ) {
    this.dir = join(stateDir, 'sweeps');
    this.index = this.scan();
  }

  /** Stored sweeps, oldest first (ids sort by time). */
  list(): readonly SweepIndexEntry[] {
    return this.index;
  }

  has(id: string): boolean {
    return this.index.some((e) => e.id === id);
  }

  /**
   * The reference for a direction: the configured one if it is of that direction, else the first
   * flagged.
   */
  referenceFor(direction: 'up' | 'down'): string | null {
    const r = this.bounds.referenceId;
    if (r && directionOfId(r) === direction) return r;
    return this.index.find((e) => e.direction === direction && e.reference)?.id ?? null;
  }

  /** Reads one stored sweep; null when it is not there or unreadable. */
  read(id: string): StoredSweep | null {
    if (!isSweepId(id)) return null;
    try {
      return JSON.parse(readFileSync(join(this.dir, `${id}.json`), 'utf8')) as StoredSweep;
    } catch {
      return null;
    }
  }

  /**
   * Writes one sweep (fsync, atomic), after removing the oldest non-reference sweeps until it fits.
   */
  async write(s: StoredSweep): Promise<void> {
    const text = JSON.stringify(s) + '\n';
    const bytes = Buffer.byteLength(text);
    mkdirSync(this.dir, { recursive: true });
    this.makeRoom(bytes, s.reference);
    await writeFileAtomic(join(this.dir, `${s.id}.json`), text);
    this.index = [
      ...this.index.filter((e) => e.id !== s.id),
      { id: s.id, direction: s.direction, bytes, reference: s.reference },
    ].sort((a, b) => a.id.localeCompare(b.id));
  }

  private protectedId(e: SweepIndexEntry): boolean {
    return e.reference || e.id === this.bounds.referenceId;
  }

  private makeRoom(bytes: number, isReference: boolean): void {
    if (isReference) return;
    const others = this.index.filter((e) => !this.protectedId(e));
    let total = others.reduce((t, e) => t + e.bytes, 0);
    while (
      others.length > 0 &&
      (others.length >= this.bounds.maxCount || total + bytes > this.bounds.maxBytes)
    ) {
      const old = others.shift()!;
      rmSync(join(this.dir, `${old.id}.json`), { force: true });
      total -= old.bytes;
      this.index = this.index.filter((e) => e.id !== old.id);
      this.removed++;
    }
  }

  private scan(): SweepIndexEntry[] {
    let names: string[];
    try {
      names = readdirSync(this.dir);
    } catch {
      return [];
    }
    const out: SweepIndexEntry[] = [];
    for (const n of names) {
      const id = n.slice(0, -5);
      if (!n.endsWith('.json') || !isSweepId(id)) {
        // a temporary file left by a crash mid-write
        if (/\.tmp$/.test(n)) rmSync(join(this.dir, n), { force: true });
        continue;
      }
      try {
        const text = readFileSync(join(this.dir, n), 'utf8');
        const s = JSON.parse(text) as StoredSweep;
        out.push({
          id,
          direction: s.direction,
          bytes: Buffer.byteLength(text),
          reference: s.reference === true,
        });
      } catch {
        // unreadable: left alone, not counted
      }
    }
    return out.sort((a, b) => a.id.localeCompare(b.id));
  }
}
