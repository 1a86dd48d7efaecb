import { BurstLog } from '../burst-log.js';
import type { Config } from '../config/schema.js';
import { SpeedPointRecorder } from '../dsp/speed-points.js';
import type { WindowResult } from '../dsp/types.js';
import type { AgentEvent } from '../events.js';
import type { Logger } from '../log.js';
import { round } from '../report/units.js';
import { findSweeps } from './detect.js';
import type { SweepEvidence } from '../watcher/rules/types.js';
import { SweepStore, type StoredSweep } from './store.js';
import { sweepRecordJson, sweepsFromPoints, type Sweep } from './sweeps.js';

/**
 * Run-ups and coast-downs recorded by `turnwise run`, streaming and in bounded memory.
 *
 * The Analyzer hands every trusted revolution to a SpeedPointRecorder (a 1x point every
 * `sweep.revolutions_per_point` revolutions, at most `sweep.max_points` held, typed arrays). At
 * every window the held speed trace is looked at (findSweeps, the same rules as `turnwise sweep`):
 * a sweep has ended when the speed has stayed at its final value for `sweep.settle_s`, when no
 * trusted revolution has come for `sweep.settle_s` (the tach lost at low speed, the fan stopped),
 * or when the held points are full. An ended sweep is read (resonances, AF, margins), stored under
 * `state_dir/sweeps` (SweepStore), published as `sweep_recorded` (info) and compared with the
 * reference sweep of its direction: a resonance that moved more than `sweep.moved_share`
 * (`resonance_moved`) or one within the separation margin of running speed that the reference did
 * not have (`resonance_near_running_speed`) is a warning event of its own. Its points are then
 * dropped. Writing is queued off the sampling path; a failing disk is logged once per burst.
 */

export interface LiveSweep {
  readonly direction: 'up' | 'down';
  /**
   * Points so far, in the order measured: speed and per channel (config order) 1x amplitude and
   * phase.
   */
  readonly points: readonly {
    readonly rpm: number;
    readonly amp_pk_mm_s: readonly number[];
    readonly phase_deg: readonly number[];
  }[];
}

export interface SweepRecorderOptions {
  readonly config: Config;
  readonly sampleRate: number;
  readonly log: Logger;
  readonly emit: (e: AgentEvent) => void;
  /** Wall-clock ms of a sample-clock index (follows a simulation's time scale). */
  readonly timeOf: (index: number) => number;
  readonly nowMs?: () => number;
  /** Told of every sweep once stored (the live page). */
  readonly onStored?: (s: StoredSweep) => void;
}

export interface ResonanceFinding {
  readonly kind: 'moved' | 'near_running';
  readonly sensor: string;
  readonly rpm: number;
  readonly reference_rpm: number | null;
  readonly moved_pct: number | null;
  readonly separation_margin_pct: number | null;
  readonly required_margin_pct: number | null;
}

/**
 * Compares a sweep with its reference (pure). Per sensor, each reference resonance is paired with
 * the nearest resonance of the new sweep; a pair further apart than `movedShare` of the reference
 * speed is "moved". A resonance of the new sweep inside the margin API 684 asks for (margin_ok
 * false) that has no reference resonance within `movedShare` of it is "near_running" (with no
 * reference, every such resonance is).
 */
export function compareSweeps(
  cur: Pick<StoredSweep, 'channels'>,
  ref: Pick<StoredSweep, 'channels'> | null,
  movedShare: number,
): ResonanceFinding[] {
  const out: ResonanceFinding[] = [];
  for (const c of cur.channels) {
    const rc = ref?.channels.find((x) => x.id === c.id);
    const refRes = (rc?.resonances ?? []).filter((r) => r.rpm !== null);
    for (const r of refRes) {
      let best: number | null = null;
      for (const x of c.resonances)
        if (x.rpm !== null && (best === null || Math.abs(x.rpm - r.rpm!) < Math.abs(best - r.rpm!)))
          best = x.rpm;
      if (best === null) continue;
      const moved = (best - r.rpm!) / r.rpm!;
      if (Math.abs(moved) > movedShare)
        out.push({
          kind: 'moved',
          sensor: c.id,
          rpm: best,
          reference_rpm: r.rpm,
          moved_pct: round(moved * 100, 1),
          separation_margin_pct: null,
          required_margin_pct: null,
        });
    }
    for (const x of c.resonances) {
      if (x.margin_ok !== false || x.rpm === null) continue;
      const known = refRes.some((r) => Math.abs(x.rpm! - r.rpm!) <= movedShare * r.rpm!);
      if (!known)
        out.push({
          kind: 'near_running',
          sensor: c.id,
          rpm: x.rpm,
          reference_rpm: null,
          moved_pct: null,
          separation_margin_pct: x.separation_margin_pct,
          required_margin_pct: x.required_margin_pct,
        });
    }
  }
  return out;
}

/** `20261203T063000Z`: a time as a safe file name. */
function compactTime(ms: number): string {
  return new Date(ms)
    .toISOString()
    .replace(/[-:]/g, '')
    .replace(/\.\d+Z$/, 'Z');
}

export class SweepRecorder {
  readonly points: SpeedPointRecorder;
  readonly store: SweepStore;
  private readonly burst: BurstLog;
  private queue: Promise<void> = Promise.resolve();
  private readonly settle: number;
  private refCache = new Map<string, StoredSweep | null>();
  /**
   * Ids given out but perhaps not yet on disk (so a failed write does not hand the same id twice).
   */
  private readonly given = new Set<string>();
  /** The reference given to a sweep whose write is still queued. */
  private readonly pendingRef = new Map<'up' | 'down', string>();
  private last: StoredSweep | null = null;
  /** Counters for the heartbeat. */
  recorded = 0;
  failed = 0;

  constructor(private readonly o: SweepRecorderOptions) {
    const s = o.config.sweep;
    this.points = new SpeedPointRecorder({
      channels: o.config.sensors.length,
      sampleRate: o.sampleRate,
      resamplePoints: o.config.dsp.resample_points,
      revolutionsPerPoint: s.revolutions_per_point,
      maxPoints: s.max_points,
    });
    this.store = new SweepStore(o.config.state_dir, {
      maxCount: s.max_count,
      maxBytes: s.max_mb * 2 ** 20,
      referenceId: s.reference_id,
    });
    this.settle = s.settle_s * o.sampleRate;
    this.burst = new BurstLog(o.log, { nowMs: o.nowMs, quietMs: 60_000 });
    // After a restart, the newest stored sweep is the last one known.
    const newest = this.store.list()[this.store.list().length - 1];
    this.last = newest ? this.store.read(newest.id) : null;
  }

  /** The last sweep's resonances with their half-power bands, for the watcher's 1x rules. */
  evidence(): SweepEvidence | null {
    const s = this.last;
    if (!s) return null;
    const resonances = s.channels.flatMap((c) =>
      c.resonances
        .filter((r) => r.rpm !== null && r.half_power_rpm[0] != null && r.half_power_rpm[1] != null)
        .map((r) => ({
          sensor: c.id,
          rpm: r.rpm!,
          half_power_rpm: [r.half_power_rpm[0]!, r.half_power_rpm[1]!] as const,
        })),
    );
    return { sweep_id: s.id, direction: s.direction, resonances };
  }

  get removed(): number {
    return this.store.removed;
  }

  /** The sweep recorded last in this run (held in memory; null before the first). */
  get lastSweep(): StoredSweep | null {
    return this.last;
  }

  /** Bytes the held points take (typed arrays). */
  get heldBytes(): number {
    return this.points.length * (17 + 16 * this.o.config.sensors.length);
  }

  /** The sweep going on now, if the held points show one (for the live page); null otherwise. */
  live(): LiveSweep | null {
    const spans = this.spans();
    const sp = spans[spans.length - 1];
    const n = this.points.length;
    if (!sp || sp.end < n - 1 - 2) return null;
    const pts = [];
    for (let i = sp.start; i < n; i++) {
      const p = this.points.point(i);
      pts.push({ rpm: p.rpm, amp_pk_mm_s: p.amp_pk_mm_s, phase_deg: p.phase_deg });
    }
    return { direction: sp.direction, points: pts };
  }

  /** At every closed window: records the sweeps that have ended. */
  onWindow(w: WindowResult): void {
    if (!this.o.config.sweep.record) return;
    this.take(w.end_index, false);
    this.burst.flush();
  }

  /** At stop: records a sweep that was still going (as far as it got), waits for every write. */
  async close(endIndex: number): Promise<void> {
    if (this.o.config.sweep.record) this.take(endIndex, true);
    await this.queue;
    this.burst.flush();
  }

  private spans() {
    const n = this.points.length;
    const rpm = new Float64Array(n);
    for (let i = 0; i < n; i++) rpm[i] = this.points.rpmAt(i);
    const cfg = this.o.config;
    let ref = cfg.machine.rated_rpm;
    if (ref === undefined) ref = rpm.reduce((m, v) => Math.max(m, v), 0);
    const s = cfg.sweep;
    return ref > 0
      ? findSweeps(rpm, {
          minChangeRpm: s.min_change_share * ref,
          reversalRpm: s.reversal_share * ref,
          steadyRpm: s.steady_share * ref,
        })
      : [];
  }

  private take(nowIndex: number, stopping: boolean): void {
    const n = this.points.length;
    if (n < 3) return;
    const lastEnd = this.points.endIndexAt(n - 1);
    const stale = nowIndex - lastEnd >= this.settle;
    const full = n >= this.points.maxPoints;
    const spans = this.spans();
    if (spans.length === 0) {
      // Standing still or steady running: nothing to keep once the revolutions stopped coming.
      if (stale) this.points.clear();
      return;
    }
    const ended = spans.filter(
      (sp) => stale || full || stopping || lastEnd - this.points.endIndexAt(sp.end) >= this.settle,
    );
    if (ended.length === 0) return;
    const sweeps = sweepsFromPoints(this.points.points(), this.o.config, this.o.sampleRate, 0);
    const lastIdx = this.points.endIndexAt(ended[ended.length - 1]!.end);
    for (const s of sweeps) {
      if (s.last_index > lastIdx) continue;
      const warn =
        full && !stale && s.last_index === lastIdx
          ? [
              `the held points were full (sweep.max_points ` +
                `= ${this.o.config.sweep.max_points}): the ` +
                `sweep is recorded as far as it had got`,
            ]
          : [];
      this.record(s, warn);
    }
    let drop = 0;
    while (drop < n && this.points.endIndexAt(drop) <= lastIdx) drop++;
    this.points.dropOldest(stale ? n : drop);
  }

  private newId(s: Sweep): string {
    const base = `${compactTime(this.o.timeOf(s.first_index))}-${s.direction}`;
    let id = base;
    for (let k = 2; this.given.has(id) || this.store.has(id); k++) id = `${base}-${k}`;
    this.given.add(id);
    return id;
  }

  private reference(direction: 'up' | 'down'): StoredSweep | null {
    const id = this.pendingRef.get(direction) ?? this.store.referenceFor(direction);
    if (!id) return null;
    if (!this.refCache.has(id)) this.refCache.set(id, this.store.read(id));
    return this.refCache.get(id) ?? null;
  }

  private record(s: Sweep, extraWarnings: string[]): void {
    const cfg = this.o.config;
    const asset = cfg.machine.id;
    const id = this.newId(s);
    const ref = this.reference(s.direction);
    const body = sweepRecordJson(s);
    const stored: StoredSweep = {
      id,
      asset,
      ts: new Date(this.o.timeOf(s.first_index)).toISOString(),
      end_ts: new Date(this.o.timeOf(s.last_index)).toISOString(),
      sample_rate_hz: this.o.sampleRate,
      reference: ref === null && !cfg.sweep.reference_id,
      compared_with: ref?.id ?? null,
      ...body,
      warnings: [...body.warnings, ...extraWarnings],
    };
    if (stored.reference) {
      this.pendingRef.set(s.direction, id);
      this.refCache.set(id, stored);
    }
    this.last = stored;
    const ts = stored.end_ts;
    const resonances = stored.channels.flatMap((c) =>
      c.resonances.map((r) => ({ sensor: c.id, ...r })),
    );
    this.o.emit({
      id: `${asset}/sweep_recorded/${id}`,
      ts,
      asset,
      type: 'sweep_recorded',
      severity: 'info',
      sweep_id: id,
      direction: s.direction,
      from_rpm: stored.from_rpm,
      to_rpm: stored.to_rpm,
      duration_s: stored.duration_s,
      points: s.points,
      reference: stored.reference,
      compared_with: stored.compared_with,
      resonances,
      warnings: stored.warnings,
    });
    const running = cfg.machine.rated_rpm ?? null;
    compareSweeps(stored, ref, cfg.sweep.moved_share).forEach((f, i) => {
      const common = {
        id: `${asset}/resonance_${f.kind === 'moved' ? 'moved' : 'near_running_speed'}/${f.sensor}/${id}/${i}`,
        ts,
        asset,
        severity: 'warning' as const,
        sensor: f.sensor,
        sweep_id: id,
        direction: s.direction,
        rpm: f.rpm,
      };
      if (f.kind === 'moved') {
        this.o.emit({
          ...common,
          type: 'resonance_moved',
          reference_id: ref!.id,
          reference_rpm: f.reference_rpm,
          moved_pct: f.moved_pct,
          moved_share_limit: cfg.sweep.moved_share,
        });
      } else {
        this.o.emit({
          ...common,
          type: 'resonance_near_running_speed',
          reference_id: ref?.id ?? null,
          running_rpm: running,
          separation_margin_pct: f.separation_margin_pct,
          required_margin_pct: f.required_margin_pct,
        });
      }
    });
    this.queue = this.queue.then(() => this.write(stored));
  }

  private async write(s: StoredSweep): Promise<void> {
    try {
      await this.store.write(s);
      this.recorded++;
      if (s.reference) this.pendingRef.delete(s.direction);
      this.o.onStored?.(s);
      this.burst.resolved('sweep not written', 'sweeps are written again');
    } catch (e) {
      this.failed++;
      // A reference that never reached the disk is no reference: the next sweep takes its place.
      if (s.reference && this.pendingRef.get(s.direction) === s.id)
        this.pendingRef.delete(s.direction);
      const code = (e as NodeJS.ErrnoException).code ?? (e as Error).message;
      this.burst.report(
        'sweep not written',
        `sweep ${s.id} could not be written to ${this.store.dir} (${code}); monitoring goes on`,
        { sweep_id: s.id, error_code: code },
        code,
      );
    }
  }
}
