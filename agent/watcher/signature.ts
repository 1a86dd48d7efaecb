import type { ChannelResult, WindowResult } from '../dsp/types.js';
import { circularSpread, normDeg, sepDeg } from './complex.js';
import type { HealthReport } from './health.js';
import type { WatcherSettings } from './settings.js';
import { pulsesPerRevHint } from './zones.js';

/**
 * Unbalance signature over one window (plus recent windows for phase stability), from the rules of
 * the trade: 1x dominates and is steady in phase; 2x is small; H and V at a bearing are about 90 deg
 * apart with a moderate ratio; bearing-to-bearing phase in one direction tells static (near 0) from
 * couple (near 180) and dynamic (in between); high in-phase axial 1x marks an overhung rotor. Other
 * patterns point to other 1x causes, which balancing would not fix.
 */

export type UnbalanceKind = 'static' | 'couple' | 'dynamic' | 'overhung' | 'none';
export type OneXCause = 'misalignment' | 'bent_shaft' | 'eccentricity' | 'looseness' | 'resonance' | 'unstable_phase' | 'weak_support';
export type Confidence = 'high' | 'medium' | 'low';
type Relation = 'in_phase' | 'opposed' | 'between';

export interface PhasePair {
  readonly direction: 'vertical' | 'horizontal' | 'axial';
  /** Unsigned phase separation after mounting angles are subtracted, degrees 0-180. */
  readonly phase_diff_deg: number;
  readonly relation: Relation;
}

export interface UnbalanceMeasures {
  /** Largest 1x r.m.s. on a healthy radial sensor, mm/s; null when none. */
  readonly max_radial_one_x_rms_mm_s: number | null;
  /** Median 1x share of the overall over the sensors that carry most of the 1x (0-1). */
  readonly one_x_share: number | null;
  /** Largest 2x/1x amplitude ratio among sensors with a significant 1x. */
  readonly two_x_over_one_x: number | null;
  readonly bearings: Readonly<
    Record<string, { readonly hv_amp_ratio: number | null; readonly hv_phase_diff_deg: number | null; readonly axial_over_radial: number | null }>
  >;
  /** Bearing-to-bearing comparisons per direction for the rotor's two bearings. */
  readonly bearing_pair: { readonly bearings: readonly [string, string]; readonly directions: readonly PhasePair[] } | null;
  /** Largest 1x phase deviation from its mean over the recent windows, degrees; null when not judged. */
  readonly phase_spread_deg: number | null;
  /** Median 1x phase jump from one window to the next (worst sensor), degrees; null when not judged. */
  readonly phase_step_deg: number | null;
  readonly stability_windows: number;
}

export interface UnbalanceAssessment {
  readonly kind: UnbalanceKind;
  /** How much of the rule set the data allowed: "low" means the verdict rests on few sensors. */
  readonly confidence: Confidence;
  /** Findings in plain words. */
  readonly evidence: readonly string[];
  /** With kind "none": the other 1x causes the findings point to, and why. */
  readonly points_to: readonly { readonly cause: OneXCause; readonly why: string }[];
  /** What the data could not show: sensors left out, rules not checked. */
  readonly limits: readonly string[];
  readonly measures: UnbalanceMeasures;
}

export interface RecentWindow {
  readonly window: WindowResult;
  readonly health: HealthReport;
}

interface Reading {
  readonly id: string;
  readonly bearing: string;
  readonly direction: ChannelResult['direction'];
  /** 1x r.m.s., mm/s. */
  readonly amp: number;
  /** 1x phase lag with the mounting angle subtracted, degrees. */
  readonly phase: number;
  readonly share: number | null;
  readonly c: ChannelResult;
}

const pct = (x: number): string => `${Math.round(x * 100)} %`;
const pct1 = (x: number): string => `${(x * 100).toFixed(1)} %`;
const mm = (x: number): string => `${x.toFixed(2)} mm/s`;
const deg = (x: number): string => `${Math.round(x)} deg`;

function median(xs: readonly number[]): number | null {
  if (xs.length === 0) return null;
  const s = [...xs].sort((a, b) => a - b);
  const m = s.length >> 1;
  return s.length % 2 ? s[m]! : (s[m - 1]! + s[m]!) / 2;
}

function relationOf(diffDeg: number, tol: number): Relation {
  if (diffDeg <= tol) return 'in_phase';
  if (diffDeg >= 180 - tol) return 'opposed';
  return 'between';
}

function readingsOf(window: WindowResult, health: HealthReport): Reading[] {
  const ok = new Set(health.channels.filter((h) => h.phase_ok).map((h) => h.id));
  const out: Reading[] = [];
  for (const c of window.channels) {
    const v = c.orders['1'];
    if (!ok.has(c.id) || !v) continue;
    out.push({ id: c.id, bearing: c.bearing, direction: c.direction, amp: v.amp_rms_mm_s, phase: normDeg(v.phase_deg - c.mounting_angle_deg), share: c.one_x_share, c });
  }
  return out;
}

const isRadial = (r: { direction: string }): boolean => r.direction !== 'axial';

/** Orders 2 and up (blade-pass multiples left out) and half orders at or above `ratio` x 1x. */
function harmonicsAbove(r: Reading, ratio: number, blades: number | null): string[] {
  const found: string[] = [];
  for (const [key, v] of Object.entries(r.c.orders)) {
    const k = Number(key);
    if (k < 2 || (blades !== null && k % blades === 0)) continue;
    if (v.amp_rms_mm_s >= ratio * r.amp) found.push(`${k}x`);
  }
  for (const p of r.c.nonsync_peaks) {
    const frac = p.order - Math.floor(p.order);
    if (Math.abs(frac - 0.5) < 0.05 && p.amp_rms_mm_s >= ratio * r.amp) found.push(`${p.order.toFixed(1)}x`);
  }
  return found;
}

export function diagnoseUnbalance(s: WatcherSettings, window: WindowResult, health: HealthReport, recent: readonly RecentWindow[] = []): UnbalanceAssessment {
  const u = s.w.unbalance;
  const tol = u.phase_tolerance_deg;
  const evidence: string[] = [];
  const limits: string[] = [];
  const pointsTo = new Map<OneXCause, string[]>();
  const point = (causes: readonly OneXCause[], why: string): void => {
    for (const c of causes) pointsTo.set(c, [...(pointsTo.get(c) ?? []), why]);
  };
  let missing = 0; // rules the data did not allow, weighted: 3 or more leaves the verdict unsupported (low)

  // A speed that betrays a wrong tach.pulses_per_rev: the vectors may not be the shaft's orders at all.
  const pprHint = pulsesPerRevHint(s, window);
  if (pprHint) limits.push(`confidence held low: ${pprHint.why}`);
  for (const h of health.channels) if (!h.ok) limits.push(`${h.id} left out: ${h.problems.join('; ')}`);
  if (health.tach.state !== 'ok') limits.push(`no phase rules: ${health.tach.why}`);
  else for (const h of health.channels) if (h.ok && !h.phase_ok) limits.push(`${h.id} not used for phase rules: ${h.phase_notes.join('; ')}`);

  const readings = readingsOf(window, health);
  const radial = readings.filter(isRadial);
  const measures = {
    max_radial_one_x_rms_mm_s: null as number | null,
    one_x_share: null as number | null,
    two_x_over_one_x: null as number | null,
    bearings: {} as Record<string, { hv_amp_ratio: number | null; hv_phase_diff_deg: number | null; axial_over_radial: number | null }>,
    bearing_pair: null as UnbalanceMeasures['bearing_pair'],
    phase_spread_deg: null as number | null,
    phase_step_deg: null as number | null,
    stability_windows: 0,
  };
  const finish = (kind: UnbalanceKind, confidence?: Confidence): UnbalanceAssessment => ({
    kind,
    confidence: pprHint ? 'low' : (confidence ?? (radial.length <= 1 || missing >= 3 ? 'low' : missing >= 1 ? 'medium' : 'high')),
    evidence,
    points_to: kind === 'none' ? [...pointsTo].map(([cause, whys]) => ({ cause, why: whys.join('; ') })) : [],
    limits,
    measures,
  });

  if (radial.length === 0) {
    limits.push('no healthy radial sensor with a 1x vector: no unbalance verdict is possible');
    return finish('none', 'low');
  }
  const maxR = radial.reduce((a, r) => (r.amp > a.amp ? r : a));
  measures.max_radial_one_x_rms_mm_s = maxR.amp;
  if (maxR.amp < s.minOneXMmS) {
    evidence.push(`largest radial 1x is ${mm(maxR.amp)} r.m.s. at ${maxR.id}, below the ${mm(s.minOneXMmS)} needed to judge unbalance: no significant unbalance`);
    return finish('none');
  }

  // 1x dominance, 2x and other harmonics.
  const main = radial.filter((r) => r.amp >= 0.5 * maxR.amp);
  const share = median(main.flatMap((r) => (r.share === null ? [] : [r.share])));
  measures.one_x_share = share;
  let notOneX = false;
  if (share === null) {
    limits.push('overall r.m.s. missing: 1x share not checked');
    missing += 1;
  } else if (share < u.one_x_share_min) {
    notOneX = true;
    evidence.push(`1x is only ${pct(share)} of the overall r.m.s. (${main.map((r) => r.id).join(', ')}): most of the vibration is at other frequencies, so it is not mainly unbalance`);
  } else evidence.push(`1x is ${pct(share)} of the overall r.m.s. (${main.map((r) => r.id).join(', ')}): 1x dominates, as with unbalance`);

  let twoXHigh = false;
  const significant = readings.filter((r) => r.amp >= 0.25 * maxR.amp);
  const twoX = significant.flatMap((r) => (r.c.orders['2'] ? [{ r, ratio: r.c.orders['2'].amp_rms_mm_s / r.amp }] : []));
  if (twoX.length === 0) {
    limits.push('no 2x vectors: the 2x rule was not checked');
    missing += 1;
  } else {
    const worst = twoX.reduce((a, b) => (b.ratio > a.ratio ? b : a));
    measures.two_x_over_one_x = worst.ratio;
    if (worst.ratio >= u.two_x_ratio_max) {
      twoXHigh = true;
      point(['misalignment'], `2x is ${pct(worst.ratio)} of 1x at ${worst.r.id} (high 2x)`);
      evidence.push(`2x is ${pct(worst.ratio)} of 1x at ${worst.r.id}: high 2x points to misalignment`);
    } else evidence.push(`2x is at most ${pct(worst.ratio)} of 1x: small, as with unbalance`);
  }
  for (const r of main) {
    const h = harmonicsAbove(r, u.harmonic_ratio, s.blades);
    if (h.length >= 3) {
      point(['looseness'], `${h.join(', ')} all above ${pct(u.harmonic_ratio)} of 1x at ${r.id} (many harmonics)`);
      evidence.push(`${r.id} shows ${h.length} harmonics or half orders above ${pct(u.harmonic_ratio)} of 1x (${h.join(', ')}): points to looseness`);
    }
  }

  // Shape of the motion at each bearing: H vs V.
  const bearingNames = [...new Set(readings.map((r) => r.bearing))];
  const pick = (bearing: string, direction: string): Reading | undefined => readings.find((r) => r.bearing === bearing && r.direction === direction);
  let shapeChecked = 0;
  let shapeWanted = 0;
  for (const b of bearingNames) {
    const v = pick(b, 'vertical');
    const hz = pick(b, 'horizontal');
    const a = pick(b, 'axial');
    const radialMax = Math.max(v?.amp ?? 0, hz?.amp ?? 0);
    const entry = { hv_amp_ratio: null as number | null, hv_phase_diff_deg: null as number | null, axial_over_radial: a && radialMax > 0 ? a.amp / radialMax : null };
    measures.bearings[b] = entry;
    if (!v && !hz) continue;
    shapeWanted += 1;
    if (!v || !hz) {
      limits.push(`${b}: ${v ? 'no healthy horizontal' : 'no healthy vertical'} sensor, the H/V rule was not checked there`);
      continue;
    }
    shapeChecked += 1;
    const ratio = Math.max(v.amp, hz.amp) / Math.max(Math.min(v.amp, hz.amp), 1e-9);
    const d = sepDeg(hz.phase, v.phase);
    entry.hv_amp_ratio = ratio;
    entry.hv_phase_diff_deg = d;
    const rel = relationOf(d, tol);
    if (rel !== 'between') {
      const why = `${b}: horizontal and vertical 1x are ${deg(d)} apart with H/V ratio ${ratio.toFixed(1)} (straight-line, directional motion)`;
      point(['eccentricity', 'looseness', 'resonance', 'weak_support'], why);
      evidence.push(`${why}: unbalance gives elliptical motion with about 90 deg between H and V`);
    } else if (ratio > u.hv_ratio_max) {
      const why = `${b}: H/V 1x ratio ${ratio.toFixed(1)} is above about ${u.hv_ratio_max} (the support is much stiffer one way)`;
      point(['resonance', 'weak_support'], why);
      evidence.push(`${why}: points to resonance or weak support rather than unbalance`);
    } else if (Math.abs(d - 90) <= tol) {
      evidence.push(`${b}: horizontal and vertical 1x are ${deg(d)} apart with H/V ratio ${ratio.toFixed(1)}: elliptical motion, as with unbalance`);
    } else evidence.push(`${b}: horizontal and vertical 1x are ${deg(d)} apart (H/V ratio ${ratio.toFixed(1)}): the motion is neither clearly elliptical nor straight-line`);
  }
  if (shapeChecked === 0) missing += 2;
  else if (shapeChecked < shapeWanted) missing += 1;

  // Bearing to bearing, per direction, for the rotor's two bearings.
  let pairKind: 'static' | 'couple' | 'dynamic' | null = null;
  const pairRel = (direction: 'vertical' | 'horizontal' | 'axial'): PhasePair | null => {
    if (!s.bearings) return null;
    const r1 = pick(s.bearings[0], direction);
    const r2 = pick(s.bearings[1], direction);
    if (!r1 || !r2) return null;
    const d = sepDeg(r1.phase, r2.phase);
    return { direction, phase_diff_deg: d, relation: relationOf(d, tol) };
  };
  if (!s.bearings) {
    limits.push('only one bearing has radial sensors: static, couple and dynamic unbalance cannot be told apart');
    missing += 3;
  } else {
    const [b1, b2] = s.bearings;
    const pairs = (['vertical', 'horizontal'] as const).flatMap((d) => pairRel(d) ?? []);
    measures.bearing_pair = { bearings: s.bearings, directions: pairs };
    if (pairs.length === 0) {
      limits.push(`no direction has healthy 1x readings at both ${b1} and ${b2}: static, couple and dynamic unbalance cannot be told apart`);
      missing += 3;
    } else {
      for (const p of pairs) {
        const meaning = p.relation === 'in_phase' ? 'in phase (static pattern)' : p.relation === 'opposed' ? 'opposed (couple pattern)' : 'neither in phase nor opposed (dynamic pattern)';
        evidence.push(`${p.direction}: ${b1} and ${b2} 1x are ${deg(p.phase_diff_deg)} apart, ${meaning}`);
      }
      const rels = new Set(pairs.map((p) => p.relation));
      if (rels.size === 1 && rels.has('in_phase')) pairKind = 'static';
      else if (rels.size === 1 && rels.has('opposed')) pairKind = 'couple';
      else pairKind = 'dynamic';
      if (rels.has('in_phase') && rels.has('opposed')) {
        limits.push('vertical and horizontal disagree between the bearings: reported as dynamic');
        missing += 1;
      }
    }
  }

  // Axial.
  const axial = readings.filter((r) => r.direction === 'axial');
  let overhungPattern = false;
  if (axial.length === 0) {
    limits.push('no healthy axial sensor: the axial rules (overhung, misalignment, bent shaft) were not checked');
    missing += 1;
  } else {
    const ratios = bearingNames.flatMap((b) => {
      const x = measures.bearings[b]?.axial_over_radial;
      return x == null ? [] : [{ b, x }];
    });
    const high = ratios.filter((r) => r.x >= u.axial_ratio_high);
    const ax = pairRel('axial');
    if (ax) measures.bearing_pair = { bearings: s.bearings!, directions: [...(measures.bearing_pair?.directions ?? []), ax] };
    if (high.length === 0) {
      const top = ratios.length ? Math.max(...ratios.map((r) => r.x)) : null;
      if (top !== null) evidence.push(`axial 1x is at most ${pct(top)} of the radial 1x: little axial vibration${s.rotor === 'overhung' ? ' (unusual for an overhung rotor)' : ', as on a centre-hung rotor'}`);
    } else {
      const list = high.map((r) => `${r.b} ${pct(r.x)}`).join(', ');
      if (ax?.relation === 'opposed') {
        const why = `axial 1x is high (${list} of radial) and ${deg(ax.phase_diff_deg)} apart end to end`;
        if (twoXHigh) point(['misalignment'], `${why}, with high 2x`);
        else point(['bent_shaft'], why);
        evidence.push(`${why}: points to ${twoXHigh ? 'misalignment (with the high 2x)' : 'a bent shaft'}`);
      } else if (ax?.relation === 'in_phase') {
        overhungPattern = true;
        evidence.push(
          `axial 1x is high (${list} of radial) with both axial readings in phase (${deg(ax.phase_diff_deg)} apart): the overhung-rotor pattern` +
            (s.rotor === 'centre_hung' ? '; machine.rotor says centre_hung, check it' : ''),
        );
      } else if (s.rotor === 'overhung') {
        evidence.push(`axial 1x is high (${list} of radial), as expected on an overhung rotor`);
        if (!ax) limits.push('only one healthy axial sensor: the axial phase relation was not checked');
      } else {
        const why = `axial 1x is high (${list} of radial) on a centre-hung rotor`;
        point(['misalignment', 'bent_shaft'], why);
        evidence.push(ax ? `${why}, axial readings ${deg(ax.phase_diff_deg)} apart: points to misalignment or a bent shaft` : `${why}: points to misalignment or a bent shaft`);
        if (!ax) limits.push('only one healthy axial sensor: misalignment and bent shaft cannot be told apart');
      }
    }
  }

  // 1x phase stability over the recent windows.
  const stab = phaseStability(s, [...recent, { window, health }], main);
  measures.phase_spread_deg = stab.spreadDeg;
  measures.phase_step_deg = stab.stepDeg;
  measures.stability_windows = stab.windows;
  if (stab.kind === 'not_judged') {
    limits.push(stab.words);
    missing += 1;
  } else if (stab.kind === 'steady') evidence.push(stab.words);
  else {
    point([stab.kind], stab.words);
    evidence.push(`${stab.words}: points to ${stab.kind === 'resonance' ? 'resonance' : 'something other than a fixed heavy spot'}`);
  }

  if (notOneX || pointsTo.size > 0) return finish('none');
  if (s.rotor === 'overhung' || overhungPattern) return finish('overhung');
  if (pairKind) return finish(pairKind);
  limits.push('reported as dynamic unbalance, the general case (two correction planes), because the bearings could not be compared');
  return finish('dynamic');
}

interface Stability {
  readonly kind: 'steady' | 'unstable_phase' | 'resonance' | 'not_judged';
  readonly words: string;
  readonly spreadDeg: number | null;
  readonly stepDeg: number | null;
  readonly windows: number;
}

/**
 * Phase stability of the channels that carry the 1x, over windows oldest first (the current one last).
 * Unstable means the phase jumps from window to window (median jump above the tolerance): a single step
 * (a weight lost) or a slow drift (build-up) is a fixed heavy spot that moved, not an unstable one.
 * Resonance: amplitude and phase swing together while the speed changes only a little.
 */
function phaseStability(s: WatcherSettings, windows: readonly RecentWindow[], main: readonly Reading[]): Stability {
  const u = s.w.unbalance;
  const use = windows.slice(-u.stability_windows);
  type Ch = { id: string; spread: number; step: number; ampRatio: number; speedSpan: number; n: number };
  const chans: Ch[] = [];
  let most = 0;
  for (const m of main) {
    const pts = use.flatMap((w) => {
      const r = readingsOf(w.window, w.health).find((x) => x.id === m.id);
      return r && w.window.speed_rpm !== null ? [{ phase: r.phase, amp: r.amp, speed: w.window.speed_rpm }] : [];
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
    return { kind: 'not_judged', words: `1x phase stability not judged: ${most} window(s) with a 1x vector, at least 3 are needed`, spreadDeg: null, stepDeg: null, windows: most };
  }
  const worst = chans.reduce((a, b) => (b.step > a.step ? b : a));
  const base = { spreadDeg: worst.spread, stepDeg: worst.step, windows: worst.n };
  if (worst.speedSpan > 0.05) {
    return { kind: 'not_judged', words: `1x phase stability not judged: speed changed ${pct1(worst.speedSpan)} over the last ${worst.n} windows`, ...base };
  }
  const res = chans.find((c) => c.speedSpan >= 0.01 && c.ampRatio >= 1.5 && c.spread >= 45);
  if (res) {
    return {
      kind: 'resonance',
      words: `${res.id}: 1x amplitude changed ${res.ampRatio.toFixed(1)}-fold and its phase swung up to ${deg(res.spread)} from its mean while speed changed only ${pct1(res.speedSpan)}`,
      spreadDeg: res.spread,
      stepDeg: res.step,
      windows: res.n,
    };
  }
  if (worst.step > u.phase_stability_deg) {
    return {
      kind: 'unstable_phase',
      words: `${worst.id}: 1x phase jumps a median ${deg(worst.step)} from one window to the next over the last ${worst.n} windows (speed within ${pct1(worst.speedSpan)})`,
      ...base,
    };
  }
  return { kind: 'steady', words: `1x phase steady: a median ${deg(worst.step)} from one window to the next over the last ${worst.n} windows (${worst.id})`, ...base };
}
