import type { StoredCoefficients } from '../balance/coefficients.js';
import type { Config } from '../config/schema.js';
import type { WindowResult } from '../dsp/types.js';
import { BurstLog } from '../burst-log.js';
import type { AgentEvent } from '../events.js';
import { isUserError, UserError } from '../errors.js';
import { silentLogger, type Logger } from '../log.js';
import { assessWith, type WindowAssessment } from './assess.js';
import { baselineFromConfig, BaselineLearner, type Baseline } from './baseline.js';
import { systemClock, type Clock } from './clock.js';
import { watcherEvent, type EventOrigin, type WatcherEventType } from './events.js';
import { DamagedFileError } from './files.js';
import { forecastBalance, unavailable, type BalanceForecast } from './forecast.js';
import { assessHealth } from './health.js';
import { FileHistoryStore, History, HistoryAggregator, type HistoryStore } from './history.js';
import { zoneIndex, worseZone, zoneWithHysteresis, type Zone } from './limits.js';
import { resolveWatcherSettings, type WatcherSettings } from './settings.js';
import type { RecentWindow } from './signature.js';
import type { SweepEvidence } from './rules/types.js';
import {
  StateTable,
  STATE_VERSION,
  type ConfirmedStates,
  type StateChange,
  type StateKey,
  type ValueOf,
  type WatcherSnapshot,
} from './state-table.js';
import {
  FileBaselineStore,
  FileCoefficientsSource,
  FileWatcherStateStore,
  type BaselineStore,
  type CoefficientsSource,
  type Quarantinable,
  type WatcherStateStore,
} from './stores.js';
import { trendReport, type TrendReport } from './trend.js';

export interface WatcherDeps {
  readonly clock: Clock;
  readonly baselineStore: BaselineStore;
  readonly stateStore: WatcherStateStore;
  readonly historyStore: HistoryStore;
  readonly coefficients: CoefficientsSource;
  /** Where disk trouble (once per burst) and damaged state files are reported. */
  readonly log: Logger;
}

/** A damaged state file found at start, moved aside. */
export interface QuarantinedFile {
  readonly file: string;
  /** Where it went; null when it could not be moved. */
  readonly moved_to: string | null;
  readonly problem: string;
}

export interface WatchStatus {
  readonly ts: string;
  readonly window: { readonly start_index: number; readonly end_index: number } | null;
  /** This window's findings, before on-delay. */
  readonly latest: WindowAssessment | null;
  /**
   * States confirmed after hysteresis and on-delay (what events were sent about), keyed as
   * STATE_ROWS.
   */
  readonly confirmed: ConfirmedStates;
  readonly baseline: Baseline | null;
  readonly learning: { readonly windows: number } | null;
  readonly trend: TrendReport | null;
  readonly forecast: BalanceForecast | null;
  readonly warnings: readonly string[];
}

export interface WatchUpdate {
  readonly events: readonly AgentEvent[];
  readonly status: WatchStatus;
}

/**
 * Problems saving under state_dir: each is logged once per burst and listed in status.warnings
 * until a save works again.
 */
const STATE_NOT_SAVED = 'confirmed states not saved';
const HISTORY_NOT_SAVED = 'history not saved';

function errorText(e: unknown): string {
  return isUserError(e) ? e.format() : e instanceof Error ? e.message : String(e);
}

/**
 * Boolean state with hysteresis: once true, it stays true until the value falls `share` below the
 * limit.
 */
function overWithHysteresis(
  prev: boolean | undefined,
  value: number,
  limit: number,
  share: number,
): boolean {
  return prev ? value > limit * (1 - share) : value >= limit;
}

/**
 * The live watcher: feeds each DSP window through the pure rules, holds zones, verdicts and sensor
 * states behind hysteresis and on-delay, returns events for what changed, learns and keeps the
 * baseline, keeps history and its trend, and forecasts the balance correction when coefficients are
 * stored.
 */
export class Watcher {
  private sweepEvidence: SweepEvidence | null = null;
  readonly settings: WatcherSettings;
  private readonly recent: RecentWindow[] = [];
  private readonly zoneHyst = new Map<string, Zone>();
  private readonly states: StateTable;
  private baselineValue: Baseline | null;
  private learner: BaselineLearner | null = null;
  private readonly history: History;
  private readonly aggregator: HistoryAggregator;
  private trendCache: TrendReport | null = null;
  private coeffs: StoredCoefficients | null = null;
  private coeffsProblem: string | null = null;
  private forecastValue: BalanceForecast | null = null;
  private latest: WindowAssessment | null = null;
  private lastWindow: WindowResult | null = null;
  private run: number;
  private savedSnapshot = '';
  /**
   * Facts about this start (damaged files moved aside, torn history lines, ...): logged once,
   * listed for the whole run.
   */
  private readonly notes: string[] = [];
  /** Current save problems by key; cleared when a save works again. */
  private readonly problems = new Map<string, string>();
  private readonly burst: BurstLog;
  /** Damaged files moved aside at start, reported by an event with the first window. */
  private quarantined: QuarantinedFile[] = [];

  constructor(
    cfg: Config,
    private readonly deps: WatcherDeps,
  ) {
    const s = (this.settings = resolveWatcherSettings(cfg));
    // Only resolved() ends a burst: every window (state) or history point retries the save.
    this.burst = new BurstLog(deps.log, {
      nowMs: () => deps.clock.now(),
      quietMs: Infinity,
      summaryEveryMs: 3600_000,
    });
    const prev = this.loadOrQuarantine(
      deps.stateStore,
      null,
      'the watcher starts afresh: the current zones and states are reported again',
    );
    this.run = (prev?.run ?? 0) + 1;
    // Without the stored start counter, the next one is unknown: count on from the clock's seconds,
    // so event ids do not repeat those of earlier starts.
    if (this.quarantined.length) this.run = this.runFromClock();
    this.states = new StateTable(
      s.w,
      s.sensors.map((x) => x.id),
      prev,
    );
    for (const sensor of s.sensors) {
      const z = prev?.zones[sensor.id];
      if (z) this.zoneHyst.set(sensor.id, z);
    }

    const fromConfig = baselineFromConfig(s);
    const stored = this.loadOrQuarantine(
      deps.baselineStore,
      null,
      'no learned baseline: learn it again at steady running ' +
        '(baseline-relative alarm and vector change are off until then)',
    );
    if (stored && stored.asset !== s.asset) {
      throw new UserError(
        'state_dir',
        `the stored baseline belongs to asset "${stored.asset}", this config is for "${s.asset}"`,
        "point state_dir at this fan's own state directory",
      );
    }
    if (fromConfig && stored)
      this.note('a learned baseline is stored but watcher.baseline in the config takes precedence');
    this.baselineValue = fromConfig ?? stored;

    const noHistory = { points: [], warnings: [], rewrite: false };
    this.history = new History(
      deps.historyStore,
      s.w.history.max_points,
      this.loadOrQuarantine(deps.historyStore, noHistory, 'the history starts afresh'),
    );
    for (const w of this.history.warnings) this.note(w);
    this.guarded(HISTORY_NOT_SAVED, () => this.history.flush(), 'history saved again');
    this.aggregator = new HistoryAggregator(s.w.history.interval_s);
    this.reloadCoefficients();
    this.trendCache = this.computeTrend();
    // Records the new start counter. If it cannot be saved, a restart would use the same one again:
    // this run counts from the clock instead, so its event ids cannot be repeated by the next
    // (every window tries to save it again).
    if (!this.persist()) this.run = Math.max(this.run, this.runFromClock());
  }

  /** A start counter from the clock's whole seconds (far above any ordinary count of starts). */
  private runFromClock(): number {
    return Math.max(1, Math.floor(this.deps.clock.now() / 1000));
  }

  /**
   * Loads one stored file. A damaged one does not stop the watcher: it is moved aside, said loudly
   * (log, status, an event with the first window), and the watcher goes on with `fresh`.
   */
  private loadOrQuarantine<T, F>(
    store: Quarantinable & { load(): T },
    fresh: F,
    consequence: string,
  ): T | F {
    try {
      return store.load();
    } catch (e) {
      if (!(e instanceof DamagedFileError)) throw e;
      const movedTo = store.quarantine(this.deps.clock.now());
      this.quarantined.push({ file: e.file, moved_to: movedTo, problem: e.problem });
      this.note(
        `${e.file} is damaged (${e.problem}); ` +
          `${movedTo ? `moved to ${movedTo} for inspection` : 'it could not be moved aside'}; ` +
          `${consequence}`,
      );
      return fresh;
    }
  }

  get baseline(): Baseline | null {
    return this.baselineValue;
  }

  /** History points in memory (at most watcher.history.max_points). */
  get historySize(): number {
    return this.history.points.length;
  }

  /** Reads the stored influence coefficients again (call after a balancing job saved new ones). */
  /**
   * The last recorded sweep's resonances, used as evidence from the next window on (null: none
   * known).
   */
  setSweepEvidence(e: SweepEvidence | null): void {
    this.sweepEvidence = e;
  }

  reloadCoefficients(): void {
    try {
      this.coeffs = this.deps.coefficients.load();
      this.coeffsProblem = null;
    } catch (e) {
      if (!isUserError(e)) throw e;
      this.coeffs = null;
      this.coeffsProblem = e.format();
    }
  }

  /** Starts learning a baseline from the coming windows (healthy sensors, steady speed). */
  startLearning(): void {
    if (this.settings.w.baseline) {
      throw new UserError(
        'watcher.baseline',
        'the baseline is set in the config',
        'remove watcher.baseline from the config to learn one from the running fan',
      );
    }
    this.learner = new BaselineLearner(this.settings);
  }

  /** Ends learning, stores the baseline and starts comparing against it. */
  stopLearning(): { baseline: Baseline; left_out: string[] } {
    if (!this.learner)
      throw new UserError(
        'baseline learning',
        'learning was not started',
        'start learning first, let the fan run steadily for a few windows, then stop',
      );
    const res = this.learner.finish(new Date(this.deps.clock.now()).toISOString());
    // when this throws, learning goes on and stopping can be tried again
    this.deps.baselineStore.save(res.baseline);
    this.learner = null;
    this.setBaseline(res.baseline);
    return res;
  }

  cancelLearning(): void {
    this.learner = null;
  }

  /** Removes the learned baseline (a baseline in the config stays). */
  clearBaseline(): boolean {
    const removed = this.deps.baselineStore.clear();
    this.setBaseline(baselineFromConfig(this.settings));
    return removed;
  }

  private setBaseline(b: Baseline | null): void {
    this.baselineValue = b;
    this.states.reset('vector_changed', false);
    this.trendCache = this.computeTrend();
    this.persist();
  }

  process(window: WindowResult): WatchUpdate {
    const s = this.settings;
    const nowMs = this.deps.clock.now();
    const origin: EventOrigin = {
      asset: s.asset,
      run: this.run,
      window,
      ts: new Date(nowMs).toISOString(),
    };
    const health = assessHealth(window, s);
    const a = assessWith(s, window, health, this.baselineValue, this.recent, this.sweepEvidence);
    this.recent.push({ window, health });
    if (this.recent.length >= s.w.unbalance.stability_windows) this.recent.shift();
    this.latest = a;
    this.lastWindow = window;

    const t0 = window.start_index / window.sample_rate_hz;
    const t1 = window.end_index / window.sample_rate_hz;
    const events: AgentEvent[] = [];
    const emit = (
      ...args: Parameters<typeof watcherEvent> extends [EventOrigin, ...infer R] ? R : never
    ): void => {
      events.push(watcherEvent(origin, ...args));
    };
    /** Feeds one state of the table; a confirmed change raises the row's event with `fields`. */
    const track = <K extends StateKey>(
      key: K,
      subject: string,
      seen: ValueOf<K>,
      fields: (c: StateChange<ValueOf<K>>) => object,
    ): StateChange<ValueOf<K>> | null => {
      const c = this.states.update(key, subject, seen, t0, t1);
      if (c?.event)
        events.push(
          watcherEvent(
            origin,
            c.event.type as WatcherEventType,
            subject,
            c.event.severity,
            fields(c) as never,
          ),
        );
      return c;
    };

    if (this.quarantined.length) {
      const files = this.quarantined;
      this.quarantined = [];
      emit('state_files_quarantined', 'machine', 'warning', {
        message:
          `damaged watcher file(s) moved aside at start, the watcher went on without ` +
          `them: ${files.map((f) => `${f.file} (${f.problem.split('\n')[0]})`).join('; ')}`,
        files,
      });
    }

    // Sensors and tach.
    for (const h of health.channels) {
      track('sensor_ok', h.id, h.ok, (c) =>
        c.to ? {} : { problems: h.problems, faults: h.faults },
      );
      track('sensor_doubt', h.id, h.ok && h.doubts.length > 0, (c) =>
        c.to ? { doubts: h.doubts } : {},
      );
    }
    track('tach', 'machine', health.tach.state, () => ({ why: health.tach.why }));

    // Speed.
    if (a.speed.state !== null) {
      track('speed', 'machine', a.speed.state, (c) =>
        c.to !== 'in_range'
          ? {
              speed_rpm: a.speed.speed_rpm,
              range_rpm: a.speed.range_rpm,
              why: a.speed.pulses_per_rev_hint
                ? `${a.speed.why}; ${a.speed.pulses_per_rev_hint.why}`
                : a.speed.why,
            }
          : { speed_rpm: a.speed.speed_rpm, range_rpm: a.speed.range_rpm },
      );
    }

    const hold = a.zone.inhibited || !health.running;
    if (!hold) {
      // Zones: hysteresis per window, then on-delay. A doubtful sensor alone does not put the
      // machine in D.
      let machine: Zone | null = null;
      let machineSure: Zone | null = null;
      const doubtfulD: string[] = [];
      for (const h of health.channels) {
        const cz = a.zone.channels[h.id]!;
        if (cz.zone === null) continue;
        const z = zoneWithHysteresis(
          cz.overall_rms_mm_s!,
          this.zoneHyst.get(h.id) ?? null,
          a.zone.limits,
          s.w.hysteresis_share,
        );
        this.zoneHyst.set(h.id, z);
        machine = machine ? worseZone(machine, z) : z;
        const sure: Zone = h.doubts.length && z === 'D' ? 'C' : z;
        if (sure !== z) doubtfulD.push(h.id);
        machineSure = machineSure ? worseZone(machineSure, sure) : sure;
        track('zones', h.id, z, (c) => ({
          scope: 'sensor',
          zone: c.to,
          from_zone: c.from ?? null,
          overall_rms_mm_s: cz.overall_rms_mm_s!,
          limits: a.zone.limits,
        }));
        const over = overWithHysteresis(
          this.states.value('over_alarm', h.id),
          cz.overall_rms_mm_s!,
          cz.alarm_mm_s,
          s.w.hysteresis_share,
        );
        track('over_alarm', h.id, over, (c) =>
          c.to
            ? {
                overall_rms_mm_s: cz.overall_rms_mm_s,
                alarm_mm_s: cz.alarm_mm_s,
                baseline: this.baselineValue !== null,
              }
            : { overall_rms_mm_s: cz.overall_rms_mm_s, alarm_mm_s: cz.alarm_mm_s },
        );
      }
      // Two doubtful sensors that agree on D are not one channel alone.
      if (machineSure && doubtfulD.length >= 2) machineSure = worseZone(machineSure, 'D');
      if (machine && machineSure) {
        const held = zoneIndex(machineSure) < zoneIndex(machine);
        track('machine_zone', 'machine', machineSure, (c) => ({
          scope: 'machine',
          zone: c.to,
          from_zone: c.from ?? null,
          limits: a.zone.limits,
          ...(held ? { held_below_d_by: doubtfulD } : {}),
        }));
      }

      // Unbalance and vector change need the phase reference.
      if (health.tach.state === 'ok') {
        const u = a.unbalance;
        const fields = {
          kind: u.kind,
          confidence: u.confidence,
          evidence: u.evidence,
          limits: u.limits,
        };
        track('unbalance', 'machine', u.kind, (c) =>
          c.event?.type === 'unbalance_cleared'
            ? { ...fields, from_kind: c.from, points_to: u.points_to }
            : c.event?.type === 'unbalance_kind_changed'
              ? { ...fields, from_kind: c.from }
              : fields,
        );

        for (const [id, vc] of Object.entries(a.vector_change ?? {})) {
          const changed = overWithHysteresis(
            this.states.value('vector_changed', id),
            vc.delta_mm_s,
            a.vector_change_limit_mm_s,
            s.w.hysteresis_share,
          );
          track('vector_changed', id, changed, () => ({
            delta_mm_s: vc.delta_mm_s,
            amp_change_mm_s: vc.amp_change_mm_s,
            phase_change_deg: vc.phase_change_deg,
            limit_mm_s: a.vector_change_limit_mm_s,
          }));
        }
        if (this.learner && (a.speed.state === 'in_range' || a.speed.state === null))
          this.learner.add(window, health);
      }

      const point = this.aggregator.add(window, health, nowMs);
      if (point) {
        this.guarded(
          HISTORY_NOT_SAVED,
          () => this.history.add(point),
          'history saved again (points kept in memory meanwhile written)',
        );
        this.trendCache = this.computeTrend();
      }
    }

    this.forecastValue = this.coeffsProblem
      ? unavailable(this.coeffsProblem)
      : this.coeffs
        ? forecastBalance(s.asset, this.coeffs, this.baselineValue, window, health)
        : null;
    this.persist();
    this.burst.flush();
    return { events, status: this.status() };
  }

  /**
   * Keeps watching when the disk fails (full, read-only): the first failure of a burst is logged,
   * the rest counted, and the problem listed in status.warnings; the first save that works again
   * clears it with an info line (`recovered`). False when `fn` threw.
   */
  private guarded(key: string, fn: () => void, recovered: string): boolean {
    try {
      fn();
    } catch (e) {
      const detail = `${key}: ${errorText(e)}`;
      this.problems.set(key, detail);
      const code = (e as NodeJS.ErrnoException)?.code;
      this.burst.report(key, detail, code ? { error_code: code } : {}, code);
      return false;
    }
    if (this.problems.delete(key)) this.burst.resolved(key, recovered);
    return true;
  }

  /**
   * A fact about this start: logged once as a warning and listed in status.warnings for the run.
   */
  private note(message: string): void {
    this.deps.log.warn({}, message);
    this.notes.push(message);
  }

  private snapshot(): WatcherSnapshot {
    return { version: STATE_VERSION, run: this.run, ...this.states.states() };
  }

  /**
   * Saves the confirmed states when they changed (rarely: a few small atomic writes a day); after a
   * failed save every call tries again. False when the save failed (reported, never thrown).
   */
  private persist(): boolean {
    const snap = this.snapshot();
    const text = JSON.stringify(snap);
    if (text === this.savedSnapshot) return true;
    return this.guarded(
      STATE_NOT_SAVED,
      () => {
        this.deps.stateStore.save(snap);
        this.savedSnapshot = text;
      },
      'confirmed states saved again',
    );
  }

  private computeTrend(): TrendReport {
    return trendReport(this.settings, this.history.points, this.baselineValue);
  }

  status(): WatchStatus {
    const snap = this.snapshot();
    const { version: _v, run: _r, ...confirmed } = snap;
    return {
      ts: new Date(this.deps.clock.now()).toISOString(),
      window: this.lastWindow
        ? { start_index: this.lastWindow.start_index, end_index: this.lastWindow.end_index }
        : null,
      latest: this.latest,
      confirmed,
      baseline: this.baselineValue,
      learning: this.learner ? { windows: this.learner.windowCount } : null,
      trend: this.trendCache,
      forecast: this.forecastValue,
      warnings: [...this.notes, ...this.problems.values()],
    };
  }
}

/** A watcher over the real files under `cfg.state_dir`. */
export function openWatcher(
  cfg: Config,
  clock: Clock = systemClock,
  log: Logger = silentLogger,
): Watcher {
  return new Watcher(cfg, {
    clock,
    log,
    baselineStore: new FileBaselineStore(cfg.state_dir),
    stateStore: new FileWatcherStateStore(cfg.state_dir),
    historyStore: new FileHistoryStore(cfg.state_dir),
    coefficients: new FileCoefficientsSource(cfg.state_dir),
  });
}
