import { join } from 'node:path';
import { z } from 'zod';
import type { WindowResult } from '../dsp/types.js';
import { abs, add, angleDeg, fromPolar, scale, ZERO, type Complex } from './complex.js';
import { appendLineDurable, moveAside, readTextOrNull, writeFileAtomic } from './files.js';
import type { HealthReport } from './health.js';
import { watcherDir, type Quarantinable } from './stores.js';

/**
 * History of overall and 1x per sensor over time, one point per `history.interval_s`, kept bounded:
 * when it outgrows `history.max_points`, the older half is merged pairwise, so recent history stays
 * fine-grained and old history gets coarser but is never cut off.
 */

export interface HistoryChannel {
  readonly overall_rms_mm_s: number | null;
  readonly one_x_rms_mm_s: number | null;
  readonly one_x_phase_deg: number | null;
}

export interface HistoryPoint {
  /** ISO 8601 UTC time the point was closed (or the mean time of merged points). */
  readonly ts: string;
  /** Windows averaged into the point. */
  readonly windows: number;
  readonly speed_rpm: number | null;
  readonly channels: Readonly<Record<string, HistoryChannel>>;
}

export interface HistoryStore extends Quarantinable {
  /**
   * Points oldest first, words about anything that had to be skipped, and whether the stored form
   * should be rewritten from the points (a torn or unreadable line). Throws DamagedFileError when
   * the stored history cannot be read at all.
   */
  load(): { points: HistoryPoint[]; warnings: string[]; rewrite: boolean };
  append(p: HistoryPoint): void;
  /** Replaces the whole history (after merging old points). */
  replace(points: readonly HistoryPoint[]): void;
}

const pointSchema = z.object({
  ts: z.iso.datetime(),
  windows: z.number().int().min(1),
  speed_rpm: z.number().nullable(),
  channels: z.record(
    z.string(),
    z.object({
      overall_rms_mm_s: z.number().nullable(),
      one_x_rms_mm_s: z.number().nullable(),
      one_x_phase_deg: z.number().nullable(),
    }),
  ),
});

/** JSON Lines under `<state_dir>/watcher/history.jsonl`: fsynced appends, atomic rewrites. */
export class FileHistoryStore implements HistoryStore {
  readonly file: string;
  constructor(stateDir: string) {
    this.file = join(watcherDir(stateDir), 'history.jsonl');
  }

  load(): { points: HistoryPoint[]; warnings: string[]; rewrite: boolean } {
    const text = readTextOrNull(this.file);
    if (text === null || text === '') return { points: [], warnings: [], rewrite: false };
    const points: HistoryPoint[] = [];
    const warnings: string[] = [];
    const lines = text.split('\n');
    lines.forEach((line, i) => {
      if (line.trim() === '') return;
      let parsed: unknown;
      try {
        parsed = JSON.parse(line);
      } catch {
        warnings.push(
          `${this.file}: line ${i + 1} is not valid JSON (torn write after a power cut?), skipped`,
        );
        return;
      }
      const r = pointSchema.safeParse(parsed);
      if (r.success) points.push(r.data);
      else
        warnings.push(
          `${this.file}: line ${i + 1} is not a history point ` +
            `(${r.error.issues[0]?.message ?? 'invalid'}), skipped`,
        );
    });
    // A torn last line would swallow the next append: the file must be rewritten from what was
    // readable.
    return { points, warnings, rewrite: !text.endsWith('\n') || warnings.length > 0 };
  }

  append(p: HistoryPoint): void {
    appendLineDurable(this.file, JSON.stringify(p));
  }

  replace(points: readonly HistoryPoint[]): void {
    writeFileAtomic(this.file, points.map((p) => JSON.stringify(p) + '\n').join(''));
  }

  quarantine(nowMs: number): string | null {
    return moveAside(this.file, nowMs);
  }
}

function weightedMean(pairs: readonly [number | null, number][]): number | null {
  let sum = 0;
  let w = 0;
  for (const [v, n] of pairs) {
    if (v === null) continue;
    sum += v * n;
    w += n;
  }
  return w > 0 ? sum / w : null;
}

/**
 * Merges points into one: means weighted by windows; the 1x phase is the angle of the mean vector.
 */
export function mergePoints(points: readonly HistoryPoint[]): HistoryPoint {
  const windows = points.reduce((a, p) => a + p.windows, 0);
  const tMs = points.reduce((a, p) => a + Date.parse(p.ts) * p.windows, 0) / windows;
  const ids = new Set(points.flatMap((p) => Object.keys(p.channels)));
  const channels: Record<string, HistoryChannel> = {};
  for (const id of ids) {
    const cs = points.flatMap((p) => (p.channels[id] ? [{ c: p.channels[id], n: p.windows }] : []));
    let vec: Complex = ZERO;
    let vecN = 0;
    for (const { c, n } of cs) {
      if (c.one_x_rms_mm_s === null || c.one_x_phase_deg === null) continue;
      vec = add(vec, scale(fromPolar(1, c.one_x_phase_deg), n));
      vecN += n;
    }
    channels[id] = {
      overall_rms_mm_s: weightedMean(cs.map(({ c, n }) => [c.overall_rms_mm_s, n])),
      one_x_rms_mm_s: weightedMean(cs.map(({ c, n }) => [c.one_x_rms_mm_s, n])),
      one_x_phase_deg: vecN > 0 && abs(vec) > 0 ? angleDeg(vec) : null,
    };
  }
  return {
    ts: new Date(Math.round(tMs)).toISOString(),
    windows,
    speed_rpm: weightedMean(points.map((p) => [p.speed_rpm, p.windows])),
    channels,
  };
}

/**
 * Keeps the newest half of `max` as it is and merges the older points pairwise until at most `max`
 * remain.
 */
export function decimate(points: readonly HistoryPoint[], max: number): HistoryPoint[] {
  let out = [...points];
  const keep = Math.floor(max / 2);
  while (out.length > max) {
    const older = out.slice(0, out.length - keep);
    const merged: HistoryPoint[] = [];
    for (let i = 0; i < older.length; i += 2)
      merged.push(i + 1 < older.length ? mergePoints([older[i]!, older[i + 1]!]) : older[i]!);
    out = [...merged, ...out.slice(out.length - keep)];
  }
  return out;
}

/**
 * In-memory history over a store, bounded by `maxPoints`. The points in memory are the truth: when
 * the store refuses a write (full disk), the next successful write rewrites the whole history, so
 * points kept only in memory meanwhile are saved late rather than lost.
 */
export class History {
  private pts: HistoryPoint[];
  readonly warnings: readonly string[];
  /** The store does not hold what is in memory (repair pending, merged, or a write failed). */
  private unsaved: boolean;

  /**
   * `loaded`: what the store held (the caller may have read it already, to deal with a damaged
   * file).
   */
  constructor(
    private readonly store: HistoryStore,
    private readonly maxPoints: number,
    loaded: ReturnType<HistoryStore['load']> = store.load(),
  ) {
    this.warnings = loaded.warnings;
    this.pts = decimate(loaded.points, maxPoints);
    this.unsaved = loaded.rewrite || this.pts.length < loaded.points.length;
  }

  get points(): readonly HistoryPoint[] {
    return this.pts;
  }

  /**
   * Points not yet in the store are written now (a whole rewrite); false when there was nothing to
   * do. Throws when the store fails.
   */
  flush(): boolean {
    if (!this.unsaved) return false;
    this.store.replace(this.pts);
    this.unsaved = false;
    return true;
  }

  /** Adds a point (kept in memory even when the store throws). */
  add(p: HistoryPoint): void {
    this.pts.push(p);
    if (this.pts.length > this.maxPoints) {
      this.pts = decimate(this.pts, this.maxPoints);
      this.unsaved = true;
    }
    if (this.flush()) return;
    this.unsaved = true; // until the append has succeeded
    this.store.append(p);
    this.unsaved = false;
  }
}

interface ChannelAcc {
  overall: number;
  overallN: number;
  amp: number;
  vec: Complex;
  vecN: number;
}

/**
 * Averages healthy readings over `intervalS` of clock time into one history point. Intervals follow
 * one another from the first window seen; a gap (fan stopped, agent down) simply lengthens the
 * interval.
 */
export class HistoryAggregator {
  private startMs: number | null = null;
  private windows = 0;
  private speedSum = 0;
  private speedN = 0;
  private acc = new Map<string, ChannelAcc>();

  constructor(private readonly intervalS: number) {}

  /** Adds a window seen at `nowMs`; returns a closed point once the interval is full. */
  add(window: WindowResult, health: HealthReport, nowMs: number): HistoryPoint | null {
    if (this.startMs === null) this.startMs = nowMs;
    this.windows += 1;
    if (window.speed_rpm !== null) {
      this.speedSum += window.speed_rpm;
      this.speedN += 1;
    }
    const h = new Map(health.channels.map((c) => [c.id, c]));
    for (const c of window.channels) {
      const ch = h.get(c.id);
      if (!ch?.ok) continue;
      let a = this.acc.get(c.id);
      if (!a) this.acc.set(c.id, (a = { overall: 0, overallN: 0, amp: 0, vec: ZERO, vecN: 0 }));
      if (c.overall_rms_mm_s !== null) {
        a.overall += c.overall_rms_mm_s;
        a.overallN += 1;
      }
      const v = c.orders['1'];
      if (ch.phase_ok && v) {
        a.amp += v.amp_rms_mm_s;
        a.vec = add(a.vec, fromPolar(1, v.phase_deg));
        a.vecN += 1;
      }
    }
    if (nowMs - this.startMs < this.intervalS * 1000) return null;
    const channels: Record<string, HistoryChannel> = {};
    for (const [id, a] of this.acc) {
      channels[id] = {
        overall_rms_mm_s: a.overallN ? a.overall / a.overallN : null,
        one_x_rms_mm_s: a.vecN ? a.amp / a.vecN : null,
        one_x_phase_deg: a.vecN && abs(a.vec) > 0 ? angleDeg(a.vec) : null,
      };
    }
    const p: HistoryPoint = {
      ts: new Date(nowMs).toISOString(),
      windows: this.windows,
      speed_rpm: this.speedN ? this.speedSum / this.speedN : null,
      channels,
    };
    this.startMs = nowMs; // the next interval starts where this one ended
    this.windows = 0;
    this.speedSum = 0;
    this.speedN = 0;
    this.acc = new Map();
    return p;
  }
}
