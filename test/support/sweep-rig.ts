/**
 * Test recordings of run-ups and coast-downs, from physics written for the tests alone (not the
 * simulator in drivers/sim, not test/support/synth.ts).
 *
 * Each bearing direction is a single-degree-of-freedom system driven by the rotor's unbalance
 * force, integrated in time (fourth-order Runge-Kutta at the sample rate), so the response is the
 * real transient one a sweep gives, not a steady-state formula evaluated point by point:
 *
 *   x'' + 2 zeta wn x' + wn^2 x = e_u w(t)^2 cos(theta(t) - heavy)      (mm, s)
 *
 * with theta the shaft angle integrated from the speed profile (0 at each tach edge), e_u an
 * unbalance "eccentricity" in mm that sets the level, and w(t) = dtheta/dt. The sensor reads the
 * acceleration x'' in volts at 100 mV/g (g = 9.80665 m/s^2) plus Gaussian noise; the tach is a
 * 0-5 V pulse whose rising edge is a two-sample ramp centred on the exact crossing of theta through
 * a whole turn, so a 2.5 V trigger finds the true edge.
 *
 * The steady-state curve these tests compare against (own computation, textbook SDOF):
 *   X(w) = e_u r^2 / sqrt((1 - r^2)^2 + (2 zeta r)^2),  r = w / wn,   lag phi = atan2(2 zeta r, 1 - r^2)
 *   velocity amplitude V = w X; velocity lag from the tach edge = heavy + phi - 90 degrees.
 */

export interface Mode {
  readonly fnHz: number;
  readonly zeta: number;
  /** Unbalance eccentricity that sets the response level, mm. */
  readonly eccentricityMm: number;
  /** Angle of the heavy spot as a lag from the tach edge, degrees. */
  readonly heavyDeg: number;
  /** Acceleration noise, mm/s^2 r.m.s. */
  readonly noiseMmS2: number;
}

export interface SpeedProfile {
  /** Speed at time t, r/min. */
  (tSeconds: number): number;
}

export interface SweepRecording {
  readonly sampleRate: number;
  /** Channels in volts: one per mode, then the tach last. */
  readonly channels: Float32Array[];
}

const MV_PER_G = 100;
const G_MM_S2 = 9806.65;

/** Seeded normal deviates (xorshift32 + Box-Muller), so a recording is the same on every run. */
function gaussian(seed: number): () => number {
  let s = seed >>> 0 || 1;
  const u = () => {
    s ^= s << 13;
    s >>>= 0;
    s ^= s >>> 17;
    s ^= s << 5;
    s >>>= 0;
    return (s + 0.5) / 4294967296;
  };
  return () => Math.sqrt(-2 * Math.log(u())) * Math.cos(2 * Math.PI * u());
}

/**
 * A speed profile: steady `holdS` at `fromRpm`, a linear ramp over `rampS` to `toRpm`, steady
 * `holdS`.
 */
export function rampProfile(
  fromRpm: number,
  toRpm: number,
  rampS: number,
  holdS: number,
): SpeedProfile {
  return (t) => {
    if (t <= holdS) return fromRpm;
    if (t >= holdS + rampS) return toRpm;
    return fromRpm + ((toRpm - fromRpm) * (t - holdS)) / rampS;
  };
}

export function recordSweep(opts: {
  sampleRate: number;
  seconds: number;
  speed: SpeedProfile;
  modes: readonly Mode[];
  seed?: number;
}): SweepRecording {
  const { sampleRate: fs, seconds, speed, modes } = opts;
  const n = Math.round(fs * seconds);
  const dt = 1 / fs;
  const out = modes.map(() => new Float32Array(n));
  const tach = new Float32Array(n);
  const noise = gaussian(opts.seed ?? 12345);
  // Shaft angle (turns) at each sample, by the trapezoid rule on the speed.
  const turns = new Float64Array(n);
  for (let i = 1; i < n; i++)
    turns[i] = turns[i - 1]! + ((speed((i - 1) * dt) + speed(i * dt)) / 120) * dt;
  // Tach: 0-5 V, rising edge a ramp from 0 to 5 V over two samples centred on each whole turn, high
  // for 20 % of a turn.
  for (let i = 0; i < n; i++) {
    const frac = turns[i]! - Math.floor(turns[i]!);
    const perSample = Math.max(1e-9, turns[i]! - (i > 0 ? turns[i - 1]! : 0));
    const samplesSinceEdge = frac / perSample;
    tach[i] = samplesSinceEdge < 1 ? 2.5 + 2.5 * samplesSinceEdge : frac < 0.2 ? 5 : 0;
    // Just before the edge the ramp starts from 0: samples within one sample of the coming edge.
    const toNext = (1 - frac) / perSample;
    if (toNext < 1) tach[i] = 2.5 - 2.5 * toNext;
  }
  modes.forEach((m, k) => {
    const wn = 2 * Math.PI * m.fnHz;
    const heavy = (m.heavyDeg * Math.PI) / 180;
    const force = (t: number, th: number) => {
      const w = (2 * Math.PI * speed(t)) / 60;
      return m.eccentricityMm * w * w * Math.cos(th - heavy);
    };
    const accel = (t: number, th: number, x: number, v: number) =>
      force(t, th) - 2 * m.zeta * wn * v - wn * wn * x;
    // Start from the steady state at the first speed, so no start-up transient rings.
    const w0 = (2 * Math.PI * speed(0)) / 60;
    const r0 = w0 / wn;
    const X0 = (m.eccentricityMm * r0 * r0) / Math.hypot(1 - r0 * r0, 2 * m.zeta * r0);
    const phi0 = Math.atan2(2 * m.zeta * r0, 1 - r0 * r0);
    let x = X0 * Math.cos(-heavy - phi0);
    let v = -w0 * X0 * Math.sin(-heavy - phi0);
    const ch = out[k]!;
    for (let i = 0; i < n; i++) {
      const t = i * dt;
      const th = 2 * Math.PI * turns[i]!;
      const thMid = 2 * Math.PI * (i + 1 < n ? (turns[i]! + turns[i + 1]!) / 2 : turns[i]!);
      const thEnd = 2 * Math.PI * (i + 1 < n ? turns[i + 1]! : turns[i]!);
      const a = accel(t, th, x, v);
      ch[i] = ((a + m.noiseMmS2 * noise()) / G_MM_S2) * (MV_PER_G / 1000);
      const k1x = v;
      const k1v = a;
      const k2x = v + (dt / 2) * k1v;
      const k2v = accel(t + dt / 2, thMid, x + (dt / 2) * k1x, k2x);
      const k3x = v + (dt / 2) * k2v;
      const k3v = accel(t + dt / 2, thMid, x + (dt / 2) * k2x, k3x);
      const k4x = v + dt * k3v;
      const k4v = accel(t + dt, thEnd, x + dt * k3x, k4x);
      x += (dt / 6) * (k1x + 2 * k2x + 2 * k3x + k4x);
      v += (dt / 6) * (k1v + 2 * k2v + 2 * k3v + k4v);
    }
  });
  return { sampleRate: fs, channels: [...out, tach] };
}

/**
 * Steady-state 1x velocity of a mode at a speed: zero-to-peak mm/s and lag from the tach edge,
 * degrees (own computation).
 */
export function steadyVelocity(m: Mode, rpm: number): { ampPk: number; phaseDeg: number } {
  const w = (2 * Math.PI * rpm) / 60;
  const r = w / (2 * Math.PI * m.fnHz);
  const X = (m.eccentricityMm * r * r) / Math.hypot(1 - r * r, 2 * m.zeta * r);
  const phi = (Math.atan2(2 * m.zeta * r, 1 - r * r) * 180) / Math.PI;
  const lag = (((m.heavyDeg + phi - 90) % 360) + 360) % 360;
  return { ampPk: w * X, phaseDeg: lag };
}

/**
 * Peak speed and half-power amplification factor of the steady-state velocity curve, found on a
 * fine grid (own computation): the reference the measured resonance is checked against.
 */
export function trueResonance(
  m: Mode,
  fromRpm: number,
  toRpm: number,
): { rpm: number; af: number; ampPk: number } {
  const steps = 200000;
  let best = 0;
  let bestRpm = fromRpm;
  const amp = (rpm: number) => steadyVelocity(m, rpm).ampPk;
  for (let i = 0; i <= steps; i++) {
    const rpm = fromRpm + ((toRpm - fromRpm) * i) / steps;
    const a = amp(rpm);
    if (a > best) {
      best = a;
      bestRpm = rpm;
    }
  }
  const half = best * Math.SQRT1_2;
  const dr = (toRpm - fromRpm) / steps;
  let n1 = bestRpm;
  while (n1 > fromRpm && amp(n1) > half) n1 -= dr;
  let n2 = bestRpm;
  while (n2 < toRpm && amp(n2) > half) n2 += dr;
  return { rpm: bestRpm, af: bestRpm / (n2 - n1), ampPk: best };
}
