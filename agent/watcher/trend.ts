import type { Baseline } from './baseline.js';
import type { HistoryPoint } from './history.js';
import { baselineAlarmMmS } from './limits.js';
import type { WatcherSettings } from './settings.js';

/**
 * Trend of a history series by a robust straight-line fit (Theil-Sen: the median of all pairwise
 * slopes, with Sen's distribution-free 95 % range for the slope), and when the fitted line will
 * cross the next limit above it. A fit whose slope range includes zero, or which explains too
 * little of the variation, is reported as "no trend".
 */

export interface LineFit {
  /** Slope, units per second. */
  readonly slope: number;
  /** 95 % range of the slope (Sen 1968), units per second. */
  readonly slopeLow: number;
  readonly slopeHigh: number;
  /** Value of the line at t = 0. */
  readonly intercept: number;
  /**
   * Share of the variance about the mean explained by the line (may be negative for a poor robust
   * fit).
   */
  readonly r2: number;
  readonly n: number;
}

/**
 * Puts the k-th smallest of a[left..right] at index k, smaller ones before it and larger after it
 * (quickselect, median-of-three pivot), in place. Far cheaper than a sort for a few order
 * statistics.
 */
function select(a: Float64Array, k: number, left = 0, right = a.length - 1): number {
  while (right > left) {
    const mid = (left + right) >> 1;
    // Median of three to the middle as pivot.
    if (a[mid]! < a[left]!) swap(a, mid, left);
    if (a[right]! < a[left]!) swap(a, right, left);
    if (a[right]! < a[mid]!) swap(a, right, mid);
    const pivot = a[mid]!;
    let i = left;
    let j = right;
    while (i <= j) {
      while (a[i]! < pivot) i++;
      while (a[j]! > pivot) j--;
      if (i <= j) swap(a, i++, j--);
    }
    if (k <= j) right = j;
    else if (k >= i) left = i;
    else break;
  }
  return a[k]!;
}

function swap(a: Float64Array, i: number, j: number): void {
  const t = a[i]!;
  a[i] = a[j]!;
  a[j] = t;
}

function median(a: Float64Array): number {
  const m = a.length >> 1;
  const hi = select(a, m);
  if (a.length % 2) return hi;
  let lo = -Infinity;
  // after select, everything below m is <= a[m]
  for (let i = 0; i < m; i++) if (a[i]! > lo) lo = a[i]!;
  return (lo + hi) / 2;
}

/** Theil-Sen fit of y over t (seconds). Null with fewer than 3 points or no spread in t. */
export function theilSen(t: ArrayLike<number>, y: ArrayLike<number>): LineFit | null {
  const n = t.length;
  if (n < 3) return null;
  const all = new Float64Array((n * (n - 1)) / 2);
  let k = 0;
  for (let i = 0; i < n; i++) {
    for (let j = i + 1; j < n; j++) {
      const dt = t[j]! - t[i]!;
      if (dt !== 0) all[k++] = (y[j]! - y[i]!) / dt;
    }
  }
  if (k === 0) return null;
  const s = all.subarray(0, k);
  const slope = median(s);
  // Sen's confidence range: C = z * sqrt(Var S), Var S = n(n-1)(2n+5)/18 (ties ignored); the bounds
  // are the M1-th and (M2+1)-th smallest slopes, M1 = (N - C) / 2, M2 = (N + C) / 2.
  const c = 1.96 * Math.sqrt((n * (n - 1) * (2 * n + 5)) / 18);
  const lo = Math.max(0, Math.min(k - 1, Math.round((k - c) / 2) - 1));
  const hi = Math.max(0, Math.min(k - 1, Math.round((k + c) / 2)));
  const slopeLow = select(s, lo);
  const slopeHigh = select(s, hi, lo);
  const resid = new Float64Array(n);
  for (let i = 0; i < n; i++) resid[i] = y[i]! - slope * t[i]!;
  const intercept = median(resid);
  let mean = 0;
  for (let i = 0; i < n; i++) mean += y[i]!;
  mean /= n;
  let ssTot = 0;
  let ssRes = 0;
  for (let i = 0; i < n; i++) {
    ssTot += (y[i]! - mean) ** 2;
    ssRes += (y[i]! - (intercept + slope * t[i]!)) ** 2;
  }
  return { slope, slopeLow, slopeHigh, intercept, r2: ssTot > 0 ? 1 - ssRes / ssTot : 0, n };
}

export interface NamedLimit {
  readonly name: string;
  readonly value_mm_s: number;
}

export interface SeriesTrend {
  readonly state: 'rising' | 'falling' | 'no_trend' | 'too_little_data';
  /** In words, with the numbers behind the judgement. */
  readonly why: string;
  readonly points: number;
  readonly slope_mm_s_per_day: number | null;
  readonly slope_range_mm_s_per_day: readonly [number, number] | null;
  readonly r2: number | null;
  /** Value of the fitted line at the newest point, mm/s. */
  readonly fitted_now_mm_s: number | null;
  /** The lowest limit above the fitted value (rising trends only). */
  readonly next_limit: NamedLimit | null;
  /**
   * When the fitted line crosses next_limit, ISO 8601 UTC, and the range from the slope's 95 %
   * range.
   */
  readonly crossing_at: string | null;
  readonly crossing_range: readonly [string, string] | null;
}

export interface TrendSettings {
  readonly min_points: number;
  readonly min_span_s: number;
  readonly span_s: number;
  readonly max_points: number;
  readonly min_r2: number;
}

const DAY_S = 86400;
const iso = (ms: number): string => new Date(ms).toISOString();
const perDay = (x: number): string => `${(x * DAY_S).toFixed(3)} mm/s per day`;

/**
 * Trend of one series over the newest `span_s`. `tMs` oldest first; null values are skipped.
 * `limits` are the levels whose crossing is forecast (zone boundaries, alarm).
 */
export function seriesTrend(
  tMs: readonly number[],
  values: readonly (number | null)[],
  limits: readonly NamedLimit[],
  cfg: TrendSettings,
): SeriesTrend {
  let tLast = -Infinity;
  for (let i = 0; i < tMs.length; i++) if (values[i] != null && tMs[i]! > tLast) tLast = tMs[i]!;
  const t: number[] = [];
  const y: number[] = [];
  for (let i = 0; i < tMs.length; i++) {
    const v = values[i];
    if (v !== null && v !== undefined && tMs[i]! >= tLast - cfg.span_s * 1000) {
      t.push(tMs[i]!);
      y.push(v);
    }
  }
  const n = t.length;
  const t0 = n ? t[0]! : 0;
  const spanS = n ? (t[n - 1]! - t0) / 1000 : 0;
  const empty = {
    points: n,
    slope_mm_s_per_day: null,
    slope_range_mm_s_per_day: null,
    r2: null,
    fitted_now_mm_s: null,
    next_limit: null,
    crossing_at: null,
    crossing_range: null,
  };
  if (n < cfg.min_points || spanS < cfg.min_span_s) {
    return {
      state: 'too_little_data',
      why:
        `${n} point(s) over ${(spanS / 3600).toFixed(1)} h; a trend needs at least ` +
        `${cfg.min_points} points over ${(cfg.min_span_s / 3600).toFixed(1)} h`,
      ...empty,
    };
  }
  // At most max_points equal-count bins (means of time and value) keep the pairwise fit cheap.
  const g = Math.min(n, cfg.max_points);
  const ts = new Float64Array(g);
  const ys = new Float64Array(g);
  for (let b = 0; b < g; b++) {
    const from = Math.floor((b * n) / g);
    const to = Math.floor(((b + 1) * n) / g);
    for (let i = from; i < to; i++) {
      ts[b] += (t[i]! - t0) / 1000;
      ys[b] += y[i]!;
    }
    ts[b] /= to - from;
    ys[b] /= to - from;
  }
  const fit = theilSen(ts, ys);
  if (!fit) return { state: 'too_little_data', why: 'all points at the same time', ...empty };
  const fittedNow = fit.intercept + fit.slope * spanS;
  const base = {
    points: n,
    slope_mm_s_per_day: fit.slope * DAY_S,
    slope_range_mm_s_per_day: [fit.slopeLow * DAY_S, fit.slopeHigh * DAY_S] as const,
    r2: fit.r2,
    fitted_now_mm_s: fittedNow,
  };
  const none = { next_limit: null, crossing_at: null, crossing_range: null };
  const range = `${perDay(fit.slopeLow)} to ${perDay(fit.slopeHigh)}`;
  if (fit.slopeLow <= 0 && fit.slopeHigh >= 0) {
    return {
      state: 'no_trend',
      why: `no trend: the 95 % range of the slope (${range}) includes zero`,
      ...base,
      ...none,
    };
  }
  if (fit.r2 < cfg.min_r2) {
    return {
      state: 'no_trend',
      why:
        `no trend: the line explains only ${Math.round(Math.max(0, fit.r2) * 100)} % ` +
        `of the variation (at least ${Math.round(cfg.min_r2 * 100)} % needed)`,
      ...base,
      ...none,
    };
  }
  if (fit.slope < 0)
    return {
      state: 'falling',
      why: `falling ${perDay(-fit.slope)} (95 % range ${range})`,
      ...base,
      ...none,
    };

  const next =
    [...limits].sort((a, b) => a.value_mm_s - b.value_mm_s).find((l) => l.value_mm_s > fittedNow) ??
    null;
  const tEndMs = t[n - 1]!;
  if (!next)
    return {
      state: 'rising',
      why: `rising ${perDay(fit.slope)} (95 % range ${range}), already above every limit`,
      ...base,
      ...none,
    };
  const gap = next.value_mm_s - fittedNow;
  const at = tEndMs + (gap / fit.slope) * 1000;
  return {
    state: 'rising',
    why:
      `rising ${perDay(fit.slope)} (95 % range ${range}); the fitted line ` +
      `reaches ${next.name} (${next.value_mm_s.toFixed(2)} mm/s) about ${iso(at)}`,
    ...base,
    next_limit: next,
    crossing_at: iso(at),
    crossing_range: [
      iso(tEndMs + (gap / fit.slopeHigh) * 1000),
      iso(tEndMs + (gap / fit.slopeLow) * 1000),
    ],
  };
}

export interface TrendReport {
  readonly channels: Readonly<
    Record<string, { readonly overall: SeriesTrend; readonly one_x: SeriesTrend }>
  >;
  /** The soonest forecast crossing over all sensors, or null. */
  readonly soonest: {
    readonly sensor: string;
    readonly series: 'overall' | 'one_x';
    readonly limit: NamedLimit;
    readonly crossing_at: string;
  } | null;
}

/**
 * Trend of overall and 1x per sensor over the history, with crossings of the zone boundaries and,
 * once a baseline exists, of the alarm level. (1x reaching a limit means the overall is at least
 * there too.) History from before a learned baseline (an earlier balance state) is left out.
 */
export function trendReport(
  s: WatcherSettings,
  allPoints: readonly HistoryPoint[],
  baseline: Baseline | null,
): TrendReport {
  const since = baseline?.learned_at ? Date.parse(baseline.learned_at) : -Infinity;
  const allMs = allPoints.map((p) => Date.parse(p.ts));
  const keep = allPoints.flatMap((_, i) => (allMs[i]! >= since ? [i] : []));
  const points = keep.map((i) => allPoints[i]!);
  const tMs = keep.map((i) => allMs[i]!);
  const channels: Record<string, { overall: SeriesTrend; one_x: SeriesTrend }> = {};
  let soonest: TrendReport['soonest'] = null;
  for (const sensor of s.sensors) {
    const limits: NamedLimit[] = [
      { name: 'zone A/B', value_mm_s: s.limits.ab_mm_s },
      { name: 'zone B/C', value_mm_s: s.limits.bc_mm_s },
      { name: 'zone C/D', value_mm_s: s.limits.cd_mm_s },
    ];
    const baseOverall = s.w.baseline_alarm
      ? (baseline?.channels[sensor.id]?.overall_rms_mm_s ?? null)
      : null;
    if (baseOverall !== null)
      limits.push({ name: 'alarm', value_mm_s: baselineAlarmMmS(baseOverall, s.limits.bc_mm_s) });
    const series = (key: 'overall_rms_mm_s' | 'one_x_rms_mm_s'): SeriesTrend =>
      seriesTrend(
        tMs,
        points.map((p) => p.channels[sensor.id]?.[key] ?? null),
        limits,
        s.w.trend,
      );
    const t = { overall: series('overall_rms_mm_s'), one_x: series('one_x_rms_mm_s') };
    channels[sensor.id] = t;
    for (const key of ['overall', 'one_x'] as const) {
      const st = t[key];
      if (st.crossing_at && st.next_limit && (!soonest || st.crossing_at < soonest.crossing_at)) {
        soonest = {
          sensor: sensor.id,
          series: key,
          limit: st.next_limit,
          crossing_at: st.crossing_at,
        };
      }
    }
  }
  return { channels, soonest };
}
