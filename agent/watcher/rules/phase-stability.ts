import { circularSpread } from '../complex.js';
import {
  deg,
  Finding,
  median,
  pct1,
  readingsOf,
  sepDeg,
  type Reading,
  type RecentWindow,
  type WatcherRule,
} from './types.js';
import type { WatcherSettings } from '../settings.js';

interface Stability {
  readonly kind: 'steady' | 'unstable_phase' | 'resonance' | 'not_judged';
  readonly words: string;
  readonly spreadDeg: number | null;
  readonly stepDeg: number | null;
  readonly windows: number;
}

/**
 * Phase stability of the channels that carry the 1x, over windows oldest first (the current one
 * last). Unstable means the phase jumps from window to window (median jump above the tolerance): a
 * single step (a weight lost) or a slow drift (build-up) is a fixed heavy spot that moved, not an
 * unstable one.
 * Resonance: amplitude and phase swing together while the speed changes only a little.
 */
function phaseStability(
  s: WatcherSettings,
  windows: readonly RecentWindow[],
  main: readonly Reading[],
): Stability {
  const u = s.w.unbalance;
  const use = windows.slice(-u.stability_windows);
  type Ch = {
    id: string;
    spread: number;
    step: number;
    ampRatio: number;
    speedSpan: number;
    n: number;
  };
  const chans: Ch[] = [];
  let most = 0;
  for (const m of main) {
    const pts = use.flatMap((w) => {
      const r = readingsOf(w.window, w.health).find((x) => x.id === m.id);
      return r && w.window.speed_rpm !== null
        ? [{ phase: r.phase, amp: r.amp, speed: w.window.speed_rpm }]
        : [];
    });
    most = Math.max(most, pts.length);
    if (pts.length < 3) continue;
    const speeds = pts.map((p) => p.speed);
    const meanSpeed = speeds.reduce((a, b) => a + b, 0) / speeds.length;
    const amps = pts.map((p) => p.amp);
    chans.push({
      id: m.id,
      spread: circularSpread(pts.map((p) => p.phase))!.maxDevDeg,
      step: median(pts.slice(1).map((p, i) => sepDeg(p.phase, pts[i]!.phase)))!,
      ampRatio: Math.max(...amps) / Math.max(Math.min(...amps), 1e-9),
      speedSpan: (Math.max(...speeds) - Math.min(...speeds)) / meanSpeed,
      n: pts.length,
    });
  }
  if (chans.length === 0) {
    return {
      kind: 'not_judged',
      words:
        `1x phase stability not judged: ${most} window(s) ` +
        `with a 1x vector, at least 3 are needed`,
      spreadDeg: null,
      stepDeg: null,
      windows: most,
    };
  }
  const worst = chans.reduce((a, b) => (b.step > a.step ? b : a));
  const base = { spreadDeg: worst.spread, stepDeg: worst.step, windows: worst.n };
  if (worst.speedSpan > 0.05) {
    return {
      kind: 'not_judged',
      words:
        `1x phase stability not judged: speed changed ` +
        `${pct1(worst.speedSpan)} over the last ${worst.n} windows`,
      ...base,
    };
  }
  const res = chans.find((c) => c.speedSpan >= 0.01 && c.ampRatio >= 1.5 && c.spread >= 45);
  if (res) {
    return {
      kind: 'resonance',
      words:
        `${res.id}: 1x amplitude changed ${res.ampRatio.toFixed(1)}-fold ` +
        `and its phase swung up to ${deg(res.spread)} from its mean ` +
        `while speed changed only ${pct1(res.speedSpan)}`,
      spreadDeg: res.spread,
      stepDeg: res.step,
      windows: res.n,
    };
  }
  if (worst.step > u.phase_stability_deg) {
    return {
      kind: 'unstable_phase',
      words:
        `${worst.id}: 1x phase jumps a median ${deg(worst.step)} from one window to the ` +
        `next over the last ${worst.n} windows (speed within ${pct1(worst.speedSpan)})`,
      ...base,
    };
  }
  return {
    kind: 'steady',
    words:
      `1x phase steady: a median ${deg(worst.step)} from one window ` +
      `to the next over the last ${worst.n} windows (${worst.id})`,
    ...base,
  };
}

/**
 * At steady speed and load the 1x phase of unbalance is steady (common practice); a phase that
 * jumps is not a fixed heavy spot, and amplitude and phase swinging together with a small speed
 * change point to resonance.
 */
export const phaseStabilityRule: WatcherRule = {
  name: 'phase-stability',
  summary:
    '1x phase over the last stability_windows windows: median window-to-window ' +
    'jump above phase_stability_deg is unstable; 1.5-fold amplitude with ' +
    '45 deg phase swing at 1-5 % speed change is resonance (common practice)',
  run({ s, window, health, recent, main, measures }) {
    const f = new Finding();
    const stab = phaseStability(s, [...recent, { window, health }], main);
    measures.phase_spread_deg = stab.spreadDeg;
    measures.phase_step_deg = stab.stepDeg;
    measures.stability_windows = stab.windows;
    if (stab.kind === 'not_judged') {
      f.limits.push(stab.words);
      f.missing += 1;
    } else if (stab.kind === 'steady') f.evidence.push(stab.words);
    else {
      f.point([stab.kind], stab.words);
      f.evidence.push(
        `${stab.words}: points to ` +
          `${stab.kind === 'resonance' ? 'resonance' : 'something other than a fixed heavy spot'}`,
      );
    }
    return f.done();
  },
};
