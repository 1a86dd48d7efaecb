/**
 * What the live page shows, kept up to date from the three inputs the agent hands out: live frames
 * (1x vectors every fraction of a second), analysis windows (overall r.m.s. and the trend) and the
 * watcher's status (zone and sensor health of the latest window). Plain data out, in the units of
 * its field names; the page converts to the display units.
 */
import { conventionText, type AngleConvention } from '../balance/conventions.js';
import { balancingCautions } from '../balance/report.js';
import type { CaptureSettings } from '../balance/workbench/capture.js';
import type { JobView } from '../balance/workbench/view.js';
import type { LiveConfig } from '../config/live.js';
import type { Config } from '../config/schema.js';
import type { LiveFrame, WindowResult } from '../dsp/types.js';
import type { BalanceForecast } from '../watcher/forecast.js';
import type { WatchStatus, Zone } from '../watcher/index.js';
import { mayAct, type Principal } from './auth.js';

export interface VectorView {
  readonly amp_pk_mm_s: number;
  readonly phase_deg: number;
}

export interface ChannelView {
  readonly id: string;
  readonly bearing: string;
  readonly direction: 'vertical' | 'horizontal' | 'axial';
  /** Latest live 1x vector; null while there is none (fan stopped, tach lost). */
  readonly one_x: VectorView | null;
  /** Earlier live 1x vectors, oldest first. */
  readonly trail: readonly VectorView[];
  /** Overall velocity r.m.s. of the latest analysis window, mm/s. */
  readonly overall_rms_mm_s: number | null;
  /** Zone of the latest window; null when not judged (no watcher status, sensor not OK). */
  readonly zone: Zone | null;
  /** Sensor health from the watcher; null before its first status. */
  readonly ok: boolean | null;
  readonly problems: readonly string[];
}

export interface LiveSnapshot {
  /**
   * Sample-clock time of the newest live frame, ms since the epoch; null before the first frame.
   */
  readonly at_ms: number | null;
  readonly speed_rpm: number | null;
  /** Seconds since the last trusted revolution. */
  readonly age_s: number | null;
  readonly machine_zone: Zone | 'unknown' | null;
  readonly zone_limits: {
    readonly ab_mm_s: number;
    readonly bc_mm_s: number;
    readonly cd_mm_s: number;
    readonly basis: string;
  } | null;
  readonly tach: { readonly state: string; readonly why: string } | null;
  readonly channels: readonly ChannelView[];
  /**
   * The watcher's balance forecast (correction weights that would bring the 1x back to baseline,
   * from the influence coefficients of an earlier job), so the crew can prepare a weight before a
   * stop; null when no coefficients are stored.
   */
  readonly forecast: BalanceForecast | null;
}

export interface TrendPoint {
  /** Wall-clock time of the window's end, ms since the epoch. */
  readonly t_ms: number;
  readonly speed_rpm: number | null;
  /** Per sensor: 1x peak amplitude and overall r.m.s. of the window, mm/s. */
  readonly channels: Readonly<
    Record<
      string,
      { readonly one_x_pk_mm_s: number | null; readonly overall_rms_mm_s: number | null }
    >
  >;
}

interface ChannelState {
  id: string;
  bearing: string;
  direction: 'vertical' | 'horizontal' | 'axial';
  oneX: VectorView | null;
  trail: VectorView[];
  overall: number | null;
  zone: Zone | null;
  ok: boolean | null;
  problems: readonly string[];
}

export class LiveView {
  private readonly channels: ChannelState[];
  private atMs: number | null = null;
  private speed: number | null = null;
  private age: number | null = null;
  private machineZone: LiveSnapshot['machine_zone'] = null;
  private limits: LiveSnapshot['zone_limits'] = null;
  private tach: LiveSnapshot['tach'] = null;
  private forecast: BalanceForecast | null = null;
  private readonly trendPoints: TrendPoint[] = [];
  /** Bumped on every change, so senders can tell whether there is anything new. */
  version = 0;

  constructor(
    cfg: Config,
    private readonly trailPoints: number,
    private readonly trendMax: number,
  ) {
    this.channels = cfg.sensors.map((s) => ({
      id: s.id,
      bearing: s.bearing,
      direction: s.direction,
      oneX: null,
      trail: [],
      overall: null,
      zone: null,
      ok: null,
      problems: [],
    }));
  }

  onLive(f: LiveFrame, atMs: number): void {
    this.atMs = atMs;
    this.speed = f.speed_rpm;
    this.age = Number.isFinite(f.age_s) ? f.age_s : null;
    for (const c of this.channels) {
      const v = f.channels.find((x) => x.id === c.id)?.orders['1'];
      if (c.oneX && this.trailPoints > 0) {
        c.trail.push(c.oneX);
        if (c.trail.length > this.trailPoints) c.trail.shift();
      }
      c.oneX = v ? { amp_pk_mm_s: v.amp_pk_mm_s, phase_deg: v.phase_deg } : null;
    }
    this.version++;
  }

  /** Records the window's overall values and adds a trend point; returns the point. */
  /**
   * The latest analysis window and its wall-clock end (for the four-run tool's amplitude reading).
   */
  latestWindow: { readonly window: WindowResult; readonly at_ms: number } | null = null;

  onWindow(w: WindowResult, atMs: number): TrendPoint {
    this.latestWindow = { window: w, at_ms: atMs };
    const channels: Record<
      string,
      { one_x_pk_mm_s: number | null; overall_rms_mm_s: number | null }
    > = {};
    for (const c of this.channels) {
      const r = w.channels.find((x) => x.id === c.id);
      c.overall = r?.overall_rms_mm_s ?? null;
      channels[c.id] = {
        one_x_pk_mm_s: r?.orders['1']?.amp_pk_mm_s ?? null,
        overall_rms_mm_s: c.overall,
      };
    }
    const point: TrendPoint = { t_ms: atMs, speed_rpm: w.speed_rpm, channels };
    this.trendPoints.push(point);
    if (this.trendPoints.length > this.trendMax)
      this.trendPoints.splice(0, this.trendPoints.length - this.trendMax);
    this.version++;
    return point;
  }

  onWatch(status: WatchStatus): void {
    const a = status.latest;
    if (!a) return;
    this.machineZone = a.zone.machine;
    this.limits = {
      ab_mm_s: a.zone.limits.ab_mm_s,
      bc_mm_s: a.zone.limits.bc_mm_s,
      cd_mm_s: a.zone.limits.cd_mm_s,
      basis: a.zone.limits.basis,
    };
    this.tach = { state: a.tach.state, why: a.tach.why };
    this.forecast = status.forecast;
    for (const c of this.channels) {
      const z = a.zone.channels[c.id];
      const h = a.sensors.find((s) => s.id === c.id);
      c.zone = z?.zone ?? null;
      c.ok = h ? h.ok : null;
      c.problems = h ? h.problems : [];
    }
    this.version++;
  }

  snapshot(): LiveSnapshot {
    return {
      at_ms: this.atMs,
      speed_rpm: this.speed,
      age_s: this.age,
      machine_zone: this.machineZone,
      zone_limits: this.limits,
      tach: this.tach,
      channels: this.channels.map((c) => ({
        id: c.id,
        bearing: c.bearing,
        direction: c.direction,
        one_x: c.oneX,
        trail: [...c.trail],
        overall_rms_mm_s: c.overall,
        zone: c.zone,
        ok: c.ok,
        problems: c.problems,
      })),
      forecast: this.forecast,
    };
  }

  trend(): readonly TrendPoint[] {
    return this.trendPoints;
  }

  /** Speed of the latest live frame, r/min (for the trial-weight suggestion). */
  get speedRpm(): number | null {
    return this.speed;
  }
}

/**
 * What the page learns when it connects: who it is, the machine, the defaults for a balancing job.
 */
export interface SessionView {
  readonly role: Principal['role'];
  readonly token_name: string;
  readonly may_act: boolean;
  readonly asset: string;
  readonly machine_name: string;
  readonly units: Config['units'];
  readonly rated_rpm: number | null;
  readonly sensors: ReadonlyArray<{
    readonly id: string;
    readonly bearing: string;
    readonly direction: 'vertical' | 'horizontal' | 'axial';
  }>;
  readonly balance_defaults: {
    readonly angle_convention: AngleConvention;
    readonly rotor_mass_kg: number | null;
    readonly bearings: number;
    readonly grade_mm_s: number | null;
    readonly planes: ReadonlyArray<{
      readonly name: string;
      readonly radius_mm: number;
      readonly max_mass_g: number | null;
      readonly positions: { readonly count: number; readonly first_deg?: number } | null;
    }>;
  };
  readonly capture: { readonly revolutions: number; readonly settle_revolutions: number };
  readonly update_hz: number;
  readonly phase_convention: string;
  readonly conventions: Readonly<Record<AngleConvention, string>>;
  readonly cautions: readonly string[];
}

/** The session of one token on this machine. */
export function sessionView(
  cfg: Config,
  live: LiveConfig,
  capture: CaptureSettings,
  p: Principal,
): SessionView {
  const b = cfg.balance;
  return {
    role: p.role,
    token_name: p.name,
    may_act: mayAct(p),
    asset: cfg.machine.id,
    machine_name: cfg.machine.name ?? cfg.machine.id,
    units: cfg.units,
    rated_rpm: cfg.machine.rated_rpm ?? null,
    sensors: cfg.sensors.map((s) => ({ id: s.id, bearing: s.bearing, direction: s.direction })),
    balance_defaults: {
      angle_convention: b?.angle_convention ?? 'against_rotation',
      rotor_mass_kg: b?.rotor_mass_kg ?? null,
      bearings: b?.bearings ?? 2,
      grade_mm_s: b?.grade_mm_s ?? null,
      planes: Object.entries(b?.planes ?? {}).map(([name, pl]) => ({
        name,
        radius_mm: pl.radius_mm,
        max_mass_g: pl.max_mass_g ?? null,
        positions: pl.positions ?? null,
      })),
    },
    capture: { revolutions: capture.revolutions, settle_revolutions: capture.settleRevolutions },
    update_hz: live.update_hz,
    phase_convention:
      'phase is the lag in degrees from the tach edge ' +
      '(reference mark) to the positive peak of the 1x velocity',
    conventions: {
      against_rotation: conventionText('against_rotation'),
      with_rotation: conventionText('with_rotation'),
    },
    cautions: balancingCautions(),
  };
}

/** Every message the server sends the page over the WebSocket. */
export type PageMessage =
  | { readonly type: 'welcome'; readonly session: SessionView }
  | { readonly type: 'trend'; readonly points: readonly TrendPoint[] }
  | { readonly type: 'trend_point'; readonly point: TrendPoint }
  | { readonly type: 'sweep_live'; readonly sweep: unknown }
  | { readonly type: 'sweep_recorded'; readonly sweep: unknown }
  | { readonly type: 'live'; readonly live: LiveSnapshot }
  | { readonly type: 'job'; readonly view: JobView | null }
  | { readonly type: 'error'; readonly code: string; readonly message: string };
