/**
 * Plant recorder: writes WAV recordings of a fan with the imperfections of a real plant, for the
 * realism corpus (test/realism-corpus.test.ts). Its physics is its own, written for the tests; it
 * shares no code with the product's simulator (drivers/sim) or with test/support/synth.ts, and it
 * writes its files with its own RIFF writer (WAVE_FORMAT_EXTENSIBLE, float 32), not the product's.
 *
 * Model (all own computation, SI units inside):
 * - A rigid rotor on two bearings. Each unbalance mass m at radius r, angle alpha (degrees from the
 *   reference mark, against rotation) and axial plane z pulls F = m r omega^2; the lever rule
 *   shares it between the bearings (F_DE = F (L - z) / L, F_NDE = F z / L).
 * - Each bearing housing moves in the vertical and the horizontal direction as its own 2nd-order
 *   system (modal mass, natural frequency, damping ratio): x'' + 2 zeta w_n x' + w_n^2
 *   x = F_dir / m. It is integrated sample by sample with the exact step of a linear 2nd-order
 *   system under a force held over the step (taken at mid-step), from the steady state at t = 0, so
 *   speed ramps and jitter act through the dynamics, not through a formula.
 * - Geometry: shaft angle theta is 0 when the mark passes the tach pickup. A sensor axis at angle
 *   psi (degrees in the direction of rotation from the pickup) sees the force F cos(theta - alpha -
 *   psi). Vertical axes sit at `vertical_axis_deg`, horizontal ones 90 degrees further in the
 *   direction of rotation; a sensor mounted on the opposite side has its axis turned by
 *   180 degrees, so it reads the negative of the housing's motion.
 * - Accelerometers read the housing acceleration x'' in volts at their sensitivity (mV/g,
 *   g = 9.80665 m/s^2), plus white noise, a small DC offset, and what the plant adds (below).
 * - The board: +/-`range_v` input range (every channel is clipped there) and 24-bit steps.
 * - Tach: a pickup whose output rises and falls with a first-order time constant (`rise_us`) from
 *   each mark passage; the marks are found from the shaft angle integrated from the instantaneous
 *   speed, so a ramp and per-revolution speed jitter show up in the pulse train as they would.
 *
 * Imperfections (each optional):
 * - `neighbour`: a second fan on the same floor at `ratio` x our nominal speed, reaching our
 *   sensors as a velocity sinusoid at its own fixed frequency (it beats with our 1x).
 * - `ramp`: a variable-speed drive changes the speed linearly between two times.
 * - `jitter_per_rev`: each revolution's speed differs from nominal by a Gaussian share (speed is
 *   linear between revolution nodes, so the shaft angle stays smooth).
 * - `mains`: 50 and 100 Hz pickup in volts on the sensor cable (ground loop), added after the
 *   sensor.
 * - `impacts`: a bearing defect: force pulses (half sine, `pulse_ms`) at a non-integer order (the
 *   defect frequency, with random slip) ring a housing resonance (its own 2nd-order system); every
 *   sensor on that bearing reads its acceleration times a transmission share.
 * - `connector`: an intermittent connector: short pulses of several volts at random times
 *   (Poisson), a decaying ring of the cable (e^(-t/decay) cos(2 pi f t)); they hit the input rail
 *   and are clipped there.
 */
import { closeSync, openSync, writeFileSync, writeSync } from 'node:fs';

export const G_M_S2 = 9.80665;

export interface Support {
  /** Natural frequency, Hz. */
  readonly fn_hz: number;
  readonly zeta: number;
  /** Modal mass of the housing in this direction, kg. */
  readonly mass_kg: number;
}

export interface BearingSpec {
  readonly name: string;
  /** Axial position along the rotor, mm (the first bearing at 0). */
  readonly position_mm: number;
  readonly vertical: Support;
  readonly horizontal: Support;
}

export interface UnbalanceMass {
  readonly grams: number;
  readonly radius_mm: number;
  /** Angle on the rotor from the reference mark, degrees, measured against rotation. */
  readonly angle_deg: number;
  /** Axial plane, mm, same origin as the bearings. */
  readonly plane_mm: number;
}

export interface ImpactTrain {
  /** Defect frequency as an order of shaft speed (e.g. an outer-race pass frequency). */
  readonly order: number;
  /** Standard deviation of each impact interval, share of the mean (rolling-element slip). */
  readonly slip_share: number;
  readonly resonance_hz: number;
  readonly zeta: number;
  /** Approximate peak of the ringing acceleration, g (sets the pulse height). */
  readonly ring_peak_g: number;
  /** Duration of each half-sine force pulse, ms. */
  readonly pulse_ms: number;
}

export interface SensorSpec {
  readonly id: string;
  readonly channel: number;
  readonly bearing: string;
  readonly direction: 'vertical' | 'horizontal';
  readonly sensitivity_mv_per_g: number;
  /** Physically mounted on the opposite side of the housing (axis turned by 180 degrees). */
  readonly opposite_side?: boolean;
  /** What the config says (`mounting_angle_deg`); omitted -> the key is not written. */
  readonly config_mounting_angle_deg?: number;
  /** White acceleration noise, g r.m.s. over the full sample band. */
  readonly noise_g: number;
  readonly dc_v: number;
  /**
   * Neighbouring fan's vibration at this sensor: velocity zero-to-peak, mm/s, and phase at t = 0,
   * degrees.
   */
  readonly neighbour?: { readonly vel_pk_mm_s: number; readonly phase_deg: number };
  /** Mains pickup, volts zero-to-peak. */
  readonly mains?: { readonly v50_pk: number; readonly v100_pk: number; readonly freq_hz: number };
  /** Share of the bearing's impact-train acceleration this sensor reads. */
  readonly impact_share?: number;
  /**
   * Intermittent connector: pulses e^(-t/decay) cos(2 pi ring_hz t) of `min_v`..`max_v` volts
   * (random sign) at random times.
   */
  readonly connector?: {
    readonly rate_per_s: number;
    readonly min_v: number;
    readonly max_v: number;
    readonly decay_ms: number;
    readonly ring_hz: number;
  };
}

export interface PlantSpec {
  readonly name: string;
  readonly sample_rate_hz: number;
  readonly seconds: number;
  readonly speed: {
    readonly rpm: number;
    readonly ramp?: { readonly from_s: number; readonly to_s: number; readonly to_rpm: number };
    readonly jitter_per_rev?: number;
  };
  /** Neighbouring fan's speed as a multiple of our nominal speed. */
  readonly neighbour_ratio?: number;
  readonly bearings: readonly [BearingSpec, BearingSpec];
  readonly unbalance: readonly UnbalanceMass[];
  /** Defect on one bearing. */
  readonly impacts?: ImpactTrain & { readonly bearing: string };
  readonly vertical_axis_deg: number;
  readonly tach: {
    readonly channel: number;
    readonly high_v: number;
    readonly pulse_deg: number;
    readonly rise_us: number;
  };
  readonly board: { readonly range_v: number; readonly bits: number };
  readonly sensors: readonly SensorSpec[];
  readonly machine: {
    readonly group: 1 | 2;
    readonly support: 'rigid' | 'flexible';
    readonly rated_rpm: number;
  };
  readonly seed: number;
}

/** Deterministic uniform generator (xorshift32), independent of the other test generators. */
export function uniform(seed: number): () => number {
  let s = seed >>> 0 || 0x9e3779b9;
  return () => {
    s ^= s << 13;
    s >>>= 0;
    s ^= s >>> 17;
    s ^= s << 5;
    s >>>= 0;
    return (s + 0.5) / 4294967296;
  };
}

/** Standard normal deviates from `uniform` (polar method). */
export function normal(seed: number): () => number {
  const u = uniform(seed);
  let spare: number | null = null;
  return () => {
    if (spare !== null) {
      const v = spare;
      spare = null;
      return v;
    }
    for (;;) {
      const a = 2 * u() - 1;
      const b = 2 * u() - 1;
      const q = a * a + b * b;
      if (q > 0 && q < 1) {
        const f = Math.sqrt((-2 * Math.log(q)) / q);
        spare = b * f;
        return a * f;
      }
    }
  };
}

const RAD = Math.PI / 180;

/** Complex number as [re, im]. */
export type Cx = readonly [number, number];
const cmul = (a: Cx, b: Cx): Cx => [a[0] * b[0] - a[1] * b[1], a[0] * b[1] + a[1] * b[0]];
const cdiv = (a: Cx, b: Cx): Cx => {
  const d = b[0] * b[0] + b[1] * b[1];
  return [(a[0] * b[0] + a[1] * b[1]) / d, (a[1] * b[0] - a[0] * b[1]) / d];
};
/** Phasor of A cos(theta - lag): A e^(-i lag). */
export const phasor = (amp: number, lagDeg: number): Cx => [
  amp * Math.cos(lagDeg * RAD),
  -amp * Math.sin(lagDeg * RAD),
];
export const ampOf = (p: Cx): number => Math.hypot(p[0], p[1]);
/** Lag in degrees, 0-360, of a phasor A e^(-i lag). */
export const lagOf = (p: Cx): number => (((-Math.atan2(p[1], p[0]) / RAD) % 360) + 360) % 360;

/** Shaft speed (rad/s) as a function of time: nominal, ramp, and per-revolution jitter nodes. */
export class SpeedProfile {
  private readonly nodesT: number[] = [];
  private readonly nodesW: number[] = [];

  constructor(private readonly spec: PlantSpec) {
    const j = spec.speed.jitter_per_rev ?? 0;
    if (j > 0) {
      // One node per nominal revolution, speed (1 + j n_k) x the ramped speed at that time.
      const g = normal(spec.seed ^ 0x5a5a);
      const T = 60 / spec.speed.rpm;
      for (let t = -T; t <= spec.seconds + 2 * T; t += T) {
        this.nodesT.push(t);
        this.nodesW.push(1 + j * g());
      }
    }
  }

  /** Ramped speed without jitter, rad/s. */
  base(t: number): number {
    const s = this.spec.speed;
    let rpm = s.rpm;
    if (s.ramp) {
      const { from_s, to_s, to_rpm } = s.ramp;
      if (t >= to_s) rpm = to_rpm;
      else if (t > from_s) rpm = s.rpm + ((to_rpm - s.rpm) * (t - from_s)) / (to_s - from_s);
    }
    return (2 * Math.PI * rpm) / 60;
  }

  omega(t: number): number {
    const w = this.base(t);
    if (this.nodesT.length === 0) return w;
    const T = this.nodesT[1]! - this.nodesT[0]!;
    const k = Math.min(this.nodesT.length - 2, Math.max(0, Math.floor((t - this.nodesT[0]!) / T)));
    const f = (t - this.nodesT[k]!) / T;
    return w * (this.nodesW[k]! * (1 - f) + this.nodesW[k + 1]! * f);
  }
}

/** Exact one-step propagator of x'' + 2 s x' + wn^2 x = u (u held over the step). */
class Oscillator {
  x = 0;
  v = 0;
  private readonly a11: number;
  private readonly a12: number;
  private readonly a21: number;
  private readonly a22: number;
  readonly wn: number;
  readonly sigma: number;

  constructor(fnHz: number, zeta: number, h: number) {
    const wn = 2 * Math.PI * fnHz;
    const sigma = zeta * wn;
    const wd = wn * Math.sqrt(1 - zeta * zeta);
    const e = Math.exp(-sigma * h);
    const c = Math.cos(wd * h);
    const s = Math.sin(wd * h);
    this.a11 = e * (c + (sigma * s) / wd);
    this.a12 = (e * s) / wd;
    this.a21 = (-e * wn * wn * s) / wd;
    this.a22 = e * (c - (sigma * s) / wd);
    this.wn = wn;
    this.sigma = sigma;
  }

  /** Advances one step under input u (acceleration units). */
  step(u: number): void {
    const xp = u / (this.wn * this.wn);
    const y = this.x - xp;
    const v = this.v;
    this.x = xp + this.a11 * y + this.a12 * v;
    this.v = this.a21 * y + this.a22 * v;
  }

  /** Acceleration now, under input u. */
  accel(u: number): number {
    return u - 2 * this.sigma * this.v - this.wn * this.wn * this.x;
  }
}

/** Frequency response of a housing direction: displacement per force, m/N, at angular speed w. */
export function receptance(sup: Support, w: number): Cx {
  const wn = 2 * Math.PI * sup.fn_hz;
  const k = sup.mass_kg * wn * wn;
  return cdiv([1, 0], [k - sup.mass_kg * w * w, sup.mass_kg * 2 * sup.zeta * wn * w]);
}

function bearingShare(spec: PlantSpec, bearing: string, planeMm: number): number {
  const [b1, b2] = spec.bearings;
  const L = b2.position_mm - b1.position_mm;
  const z = planeMm - b1.position_mm;
  return bearing === b1.name ? (L - z) / L : z / L;
}

/**
 * Steady-state 1x velocity phasor (mm/s zero-to-peak, lag convention) of the housing at a sensor's
 * bearing and direction (along the reference axis, before any 180-degree turn) at shaft speed w:
 * force phasor along the sensor axis sum(m r w^2 share e^(-i(alpha + psi))), times the housing
 * receptance of that direction, times i w.
 */
export function oneXVelocity(spec: PlantSpec, s: SensorSpec, w: number): Cx {
  const b = spec.bearings.find((x) => x.name === s.bearing)!;
  const sup = s.direction === 'vertical' ? b.vertical : b.horizontal;
  let f: Cx = [0, 0];
  for (const u of spec.unbalance) {
    const F =
      u.grams * 1e-3 * u.radius_mm * 1e-3 * w * w * bearingShare(spec, s.bearing, u.plane_mm);
    // the housing's motion along the reference axis of this direction (a sensor turned by 180 deg
    // reads its negative)
    const p = phasor(
      F,
      u.angle_deg + spec.vertical_axis_deg + (s.direction === 'horizontal' ? 90 : 0),
    );
    f = [f[0] + p[0], f[1] + p[1]];
  }
  const x = cmul(f, receptance(sup, w));
  const v = cmul(x, [0, w]);
  return [v[0] * 1000, v[1] * 1000];
}

const tracks = new WeakMap<PlantSpec, ReturnType<typeof computeTrack>>();

/**
 * Shaft-angle track: theta per sample (rad), speed per sample (rad/s) and the mark passage times
 * (s). Cached per spec.
 */
export function shaftTrack(spec: PlantSpec): {
  theta: Float64Array;
  omega: Float64Array;
  marks: number[];
  theta0: number;
} {
  let t = tracks.get(spec);
  if (!t) tracks.set(spec, (t = computeTrack(spec)));
  return t;
}

function computeTrack(spec: PlantSpec): {
  theta: Float64Array;
  omega: Float64Array;
  marks: number[];
  theta0: number;
} {
  const fs = spec.sample_rate_hz;
  const n = Math.round(spec.seconds * fs);
  const prof = new SpeedProfile(spec);
  const theta = new Float64Array(n);
  const omega = new Float64Array(n);
  const theta0 = -1.1; // the record starts 63 deg before a mark passage
  const marks: number[] = [];
  let th = theta0;
  const sub = 4; // Simpson sub-steps per sample
  for (let i = 0; i < n; i++) {
    const t = i / fs;
    theta[i] = th;
    omega[i] = prof.omega(t);
    // advance to the next sample
    const h = 1 / fs / sub;
    let next = th;
    for (let j = 0; j < sub; j++) {
      const ta = t + j * h;
      next += (h / 6) * (prof.omega(ta) + 4 * prof.omega(ta + h / 2) + prof.omega(ta + h));
    }
    const k = Math.floor(next / (2 * Math.PI));
    if (k > Math.floor(th / (2 * Math.PI))) {
      // mark passage inside this step: linear in angle across one sample is accurate to ~1e-9 s
      const target = 2 * Math.PI * k;
      marks.push(t + (target - th) / (next - th) / fs);
    }
    th = next;
  }
  return { theta, omega, marks, theta0 };
}

/** Generates the channels in volts (planar, one Float32Array per board channel). */
export function record(spec: PlantSpec): Float32Array[] {
  const fs = spec.sample_rate_hz;
  const h = 1 / fs;
  const n = Math.round(spec.seconds * fs);
  const nch = Math.max(spec.tach.channel, ...spec.sensors.map((s) => s.channel)) + 1;
  const out = Array.from({ length: nch }, () => new Float32Array(n));
  const { theta, omega, marks } = shaftTrack(spec);
  const prof = new SpeedProfile(spec);

  // Housing oscillators per bearing and direction, started in the steady state of t = 0.
  type Dir = 'vertical' | 'horizontal';
  const dirs: Dir[] = ['vertical', 'horizontal'];
  const osc = new Map<string, Oscillator>();
  const forceAt = (bearing: string, dir: Dir, th: number, w: number): number => {
    const psi = spec.vertical_axis_deg + (dir === 'horizontal' ? 90 : 0);
    let F = 0;
    for (const u of spec.unbalance) {
      F +=
        u.grams *
        1e-3 *
        u.radius_mm *
        1e-3 *
        w *
        w *
        bearingShare(spec, bearing, u.plane_mm) *
        Math.cos(th - (u.angle_deg + psi) * RAD);
    }
    return F;
  };
  for (const b of spec.bearings) {
    for (const d of dirs) {
      const sup = b[d];
      const o = new Oscillator(sup.fn_hz, sup.zeta, h);
      // steady state: x = Re{F G e^(i theta)}, v = Re{i w F G e^(i theta)}
      const w0 = omega[0]!;
      const psi = spec.vertical_axis_deg + (d === 'horizontal' ? 90 : 0);
      let f: Cx = [0, 0];
      for (const u of spec.unbalance) {
        const p = phasor(
          u.grams * 1e-3 * u.radius_mm * 1e-3 * w0 * w0 * bearingShare(spec, b.name, u.plane_mm),
          u.angle_deg + psi,
        );
        f = [f[0] + p[0], f[1] + p[1]];
      }
      const X = cmul(f, receptance(sup, w0));
      const rot: Cx = [Math.cos(theta[0]!), Math.sin(theta[0]!)];
      const xr = cmul(X, rot);
      const vr = cmul(cmul(X, [0, w0]), rot);
      o.x = xr[0];
      o.v = vr[0];
      osc.set(`${b.name}/${d}`, o);
    }
  }
  const housingAccel = new Map<string, Float64Array>();
  for (const b of spec.bearings) {
    for (const d of dirs) {
      const o = osc.get(`${b.name}/${d}`)!;
      const m = b[d].mass_kg;
      const acc = new Float64Array(n);
      for (let i = 0; i < n; i++) {
        const u = forceAt(b.name, d, theta[i]!, omega[i]!) / m;
        acc[i] = o.accel(u);
        // force at mid-step: angle and speed halfway to the next sample
        const tm = (i + 0.5) / fs;
        const wm = prof.omega(tm);
        const thm = theta[i]! + 0.5 * (i + 1 < n ? theta[i + 1]! - theta[i]! : wm * h);
        o.step(forceAt(b.name, d, thm, wm) / m);
      }
      housingAccel.set(`${b.name}/${d}`, acc);
    }
  }

  // Bearing-defect ringing (acceleration, m/s^2) on its bearing.
  let ringing: Float64Array | null = null;
  if (spec.impacts) {
    const im = spec.impacts;
    const o = new Oscillator(im.resonance_hz, im.zeta, h);
    const tau = im.pulse_ms / 1000;
    const wn = 2 * Math.PI * im.resonance_hz;
    // A short pulse of velocity change dv rings at about wn dv; the half sine's spectrum at the
    // resonance trims it: |cos(pi f tau) / (1 - (2 f tau)^2)|.
    const ft = im.resonance_hz * tau;
    const trim = Math.abs(Math.cos(Math.PI * ft) / (1 - 4 * ft * ft));
    const dv = (im.ring_peak_g * G_M_S2) / (wn * trim);
    const P = (dv * Math.PI) / (2 * tau);
    const g = normal(spec.seed ^ 0x1234);
    const starts: number[] = [];
    for (let t = 0.01; t < spec.seconds;) {
      starts.push(t);
      const f = (im.order * prof.omega(t)) / (2 * Math.PI);
      t += (1 / f) * (1 + im.slip_share * g());
    }
    ringing = new Float64Array(n);
    let k = 0;
    const pulse = (t: number): number => {
      while (k < starts.length && starts[k]! + tau < t) k++;
      const s0 = starts[k];
      if (s0 === undefined || t < s0) return 0;
      return P * Math.sin((Math.PI * (t - s0)) / tau);
    };
    for (let i = 0; i < n; i++) {
      const t = i / fs;
      const kk = k;
      ringing[i] = o.accel(pulse(t));
      k = kk;
      o.step(pulse(t + h / 2));
    }
  }

  // Tach pickup: first-order rise from each mark passage, first-order fall after pulse_deg of
  // rotation.
  const tach = out[spec.tach.channel]!;
  {
    const tauT = spec.tach.rise_us * 1e-6;
    const ends: number[] = [];
    // end of each pulse: shaft angle passes 2 pi k + pulse width
    const wPulse = spec.tach.pulse_deg * RAD;
    for (let i = 1; i < n; i++) {
      const a = theta[i - 1]!;
      const b = theta[i]!;
      const k = Math.floor((b - wPulse) / (2 * Math.PI));
      if (k > Math.floor((a - wPulse) / (2 * Math.PI))) {
        const target = 2 * Math.PI * k + wPulse;
        ends.push((i - 1 + (target - a) / (b - a)) / fs);
      }
    }
    let mi = -1;
    let ei = -1;
    for (let i = 0; i < n; i++) {
      const t = i / fs;
      while (mi + 1 < marks.length && marks[mi + 1]! <= t) mi++;
      while (ei + 1 < ends.length && ends[ei + 1]! <= t) ei++;
      const lastMark = mi >= 0 ? marks[mi]! : -Infinity;
      const lastEnd = ei >= 0 ? ends[ei]! : -Infinity;
      let v: number;
      if (lastMark > lastEnd) v = spec.tach.high_v * (1 - Math.exp(-(t - lastMark) / tauT));
      else {
        // level at the end of the pulse, then the fall
        const riseLen = lastEnd - (mi >= 0 ? marks[mi]! : lastEnd);
        const atEnd = mi >= 0 ? spec.tach.high_v * (1 - Math.exp(-riseLen / tauT)) : 0;
        v = Number.isFinite(lastEnd) ? atEnd * Math.exp(-(t - lastEnd) / tauT) : 0;
      }
      tach[i] = v;
    }
  }

  // Sensors.
  spec.sensors.forEach((s, si) => {
    const dst = out[s.channel]!;
    const acc = housingAccel.get(`${s.bearing}/${s.direction}`)!;
    const sign = s.opposite_side ? -1 : 1;
    const vPerMS2 = s.sensitivity_mv_per_g / 1000 / G_M_S2;
    const g = normal(spec.seed * 31 + si + 1);
    const nb = s.neighbour;
    const fNb = ((spec.neighbour_ratio ?? 1) * spec.speed.rpm) / 60;
    const mains = s.mains;
    const impact =
      spec.impacts && spec.impacts.bearing === s.bearing && ringing ? (s.impact_share ?? 0) : 0;
    for (let i = 0; i < n; i++) {
      const t = i / fs;
      let a = sign * acc[i]!;
      if (nb) {
        // v = V cos(2 pi f t - phi) -> a = -V 2 pi f sin(2 pi f t - phi)
        const wN = 2 * Math.PI * fNb;
        a -= nb.vel_pk_mm_s * 1e-3 * wN * Math.sin(wN * t - nb.phase_deg * RAD);
      }
      if (impact) a += impact * ringing![i]!;
      a += s.noise_g * G_M_S2 * g();
      let v = a * vPerMS2 + s.dc_v;
      if (mains)
        v +=
          mains.v50_pk * Math.sin(2 * Math.PI * mains.freq_hz * t) +
          mains.v100_pk * Math.sin(4 * Math.PI * mains.freq_hz * t + 0.7);
      dst[i] = v;
    }
    if (s.connector) {
      const c = s.connector;
      const u = uniform(spec.seed * 7 + si + 101);
      const decay = c.decay_ms / 1000;
      for (
        let t = -Math.log(u()) / c.rate_per_s;
        t < spec.seconds;
        t += -Math.log(u()) / c.rate_per_s
      ) {
        const amp = (c.min_v + (c.max_v - c.min_v) * u()) * (u() < 0.5 ? -1 : 1);
        const i0 = Math.ceil(t * fs);
        for (let i = i0; i < n && i < i0 + Math.ceil(8 * decay * fs); i++) {
          const d = i / fs - t;
          dst[i] = dst[i]! + amp * Math.exp(-d / decay) * Math.cos(2 * Math.PI * c.ring_hz * d);
        }
      }
    }
  });

  // The board: clip at the input range, 24-bit steps.
  const rail = spec.board.range_v;
  const lsb = rail / 2 ** (spec.board.bits - 1);
  for (const ch of out) {
    for (let i = 0; i < n; i++) {
      let v = ch[i]!;
      if (v > rail) v = rail;
      else if (v < -rail) v = -rail;
      ch[i] = Math.round(v / lsb) * lsb;
    }
  }
  return out;
}

/**
 * Writes float-32 RIFF/WAVE in the WAVE_FORMAT_EXTENSIBLE layout (40-byte fmt chunk, KSDATAFORMAT_
 * SUBTYPE_IEEE_FLOAT), as multichannel recorders commonly write it.
 */
export function writeExtensibleWav(
  file: string,
  sampleRate: number,
  channels: readonly Float32Array[],
): void {
  const nch = channels.length;
  const n = channels[0]!.length;
  const data = n * nch * 4;
  const h = Buffer.alloc(12 + 8 + 40 + 8 + 4 + 8);
  let o = 0;
  const id = (s: string) => void (h.write(s, o, 'ascii'), (o += 4));
  const u32 = (v: number) => void (h.writeUInt32LE(v, o), (o += 4));
  const u16 = (v: number) => void (h.writeUInt16LE(v, o), (o += 2));
  id('RIFF');
  u32(h.length - 8 + data);
  id('WAVE');
  id('fmt ');
  u32(40);
  u16(0xfffe);
  u16(nch);
  u32(sampleRate);
  u32(sampleRate * nch * 4);
  u16(nch * 4);
  u16(32);
  u16(22);
  u16(32); // valid bits
  u32(0); // channel mask: none (not loudspeaker channels)
  // SubFormat GUID 00000003-0000-0010-8000-00aa00389b71
  u32(3);
  u16(0);
  u16(0x10);
  for (const b of [0x80, 0x00, 0x00, 0xaa, 0x00, 0x38, 0x9b, 0x71]) h.writeUInt8(b, o++);
  id('fact');
  u32(4);
  u32(n);
  id('data');
  u32(data);
  const fd = openSync(file, 'w');
  try {
    writeSync(fd, h);
    const rows = 4096;
    const buf = Buffer.alloc(rows * nch * 4);
    for (let i = 0; i < n; i += rows) {
      const m = Math.min(rows, n - i);
      for (let j = 0; j < m; j++)
        for (let c = 0; c < nch; c++) buf.writeFloatLE(channels[c]![i + j]!, (j * nch + c) * 4);
      writeSync(fd, buf, 0, m * nch * 4);
    }
  } finally {
    closeSync(fd);
  }
}

/** The config a technician would write for this recording. */
export function configYaml(spec: PlantSpec, stateDir: string): string {
  const lines = [
    `machine: {id: kessrow-id3a, name: "Kessrow Board Mill fan ` +
      `ID-3A (invented)", group: ${spec.machine.group}, support: ` +
      `${spec.machine.support}, rated_rpm: ${spec.machine.rated_rpm}}`,
    `tach: {channel: ${spec.tach.channel}, trigger_v: ${spec.tach.high_v / 2}}`,
    `state_dir: ${JSON.stringify(stateDir)}`,
    'sensors:',
    ...spec.sensors.map(
      (s) =>
        `  - {id: ${s.id}, channel: ${s.channel}, bearing: ${s.bearing}, direction: ` +
        `${s.direction}, sensitivity_mv_per_g: ${s.sensitivity_mv_per_g}` +
        (s.config_mounting_angle_deg !== undefined
          ? `, mounting_angle_deg: ${s.config_mounting_angle_deg}`
          : '') +
        '}',
    ),
  ];
  return lines.join('\n') + '\n';
}

/** Records `spec` to `<dir>/<name>.wav` and writes `<dir>/<name>.yaml`; returns both paths. */
export function writeRecording(
  spec: PlantSpec,
  dir: string,
  stateDir: string,
): { wav: string; yaml: string } {
  const wav = `${dir}/${spec.name}.wav`;
  const yaml = `${dir}/${spec.name}.yaml`;
  writeExtensibleWav(wav, spec.sample_rate_hz, record(spec));
  writeFileSync(yaml, configYaml(spec, stateDir));
  return { wav, yaml };
}

// ---------------------------------------------------------------------------------------------
// Expected values, from the parameters (own computation; never from the product).

/** Velocity r.m.s. of white acceleration noise (g r.m.s. over 0..fs/2) inside a band, mm/s. */
export function noiseBandRmsMmS(noiseG: number, fs: number, lowHz: number, highHz: number): number {
  const sa = noiseG * G_M_S2 * 1000; // mm/s^2
  const psd = (sa * sa) / (fs / 2); // one-sided, (mm/s^2)^2 per Hz
  return Math.sqrt((psd / (4 * Math.PI * Math.PI)) * (1 / lowHz - 1 / highHz));
}

/**
 * Velocity-equivalent r.m.s. of the mains pickup, mm/s (volts -> m/s^2 at the sensitivity -> / w).
 */
export function mainsRmsMmS(s: SensorSpec): number {
  if (!s.mains) return 0;
  const perV = (G_M_S2 * 1000) / (s.sensitivity_mv_per_g / 1000); // mm/s^2 per volt
  const a = (s.mains.v50_pk * perV) / (2 * Math.PI * s.mains.freq_hz);
  const b = (s.mains.v100_pk * perV) / (4 * Math.PI * s.mains.freq_hz);
  return Math.sqrt((a * a + b * b) / 2);
}

/**
 * Band power of the impact train's velocity, (mm/s)^2: lines at k x the defect frequency, each the
 * force line 2 f |pulse spectrum| through the resonance's acceleration response w^2 / |wn^2 - w^2 +
 * 2 i zeta wn w|, divided by w; only lines inside the band.
 */
export function impactBandPower(
  spec: PlantSpec,
  share: number,
  lowHz: number,
  highHz: number,
): number {
  const im = spec.impacts;
  if (!im || share === 0) return 0;
  const tau = im.pulse_ms / 1000;
  const wn = 2 * Math.PI * im.resonance_hz;
  const ft = im.resonance_hz * tau;
  const trim = Math.abs(Math.cos(Math.PI * ft) / (1 - 4 * ft * ft));
  const dv = (im.ring_peak_g * G_M_S2) / (wn * trim);
  const fb = (im.order * spec.speed.rpm) / 60;
  let p = 0;
  for (let k = 1; k * fb <= highHz; k++) {
    const f = k * fb;
    if (f < lowHz) continue;
    const x = f * tau;
    const shape = Math.abs(Math.cos(Math.PI * x) / (1 - 4 * x * x));
    const line = 2 * fb * dv * shape; // m/s^2 per unit mass force line
    const w = 2 * Math.PI * f;
    const acc = (line * w * w) / Math.hypot(wn * wn - w * w, 2 * im.zeta * wn * w);
    const vel = (acc / w) * 1000 * share;
    p += (vel * vel) / 2;
  }
  return p;
}

/** Mark passage times of the record (the same shaft-angle integration the recorder uses). */
export function markTimes(spec: PlantSpec): number[] {
  return shaftTrack(spec).marks;
}

/**
 * Expected synchronous-average 1x velocity phasor of a sensor, mm/s zero-to-peak (lag convention):
 * the steady-state 1x phasor at each revolution's mean speed, with the sensor's 180-degree turn,
 * plus the neighbour's order-1 Fourier coefficient over that revolution, averaged over the
 * revolutions from `firstRev` on. Includes the tach pickup's trigger delay (tau ln 2 at a
 * half-height trigger). `domain: 'acceleration'` averages i w v instead (what an order-tracked
 * average of the raw acceleration gives) and turns it into velocity at the mean speed; at steady
 * speed both agree.
 */
export function expectedOneX(
  spec: PlantSpec,
  s: SensorSpec,
  opts: { firstRev?: number; domain?: 'velocity' | 'acceleration' } = {},
): Cx {
  const firstRev = opts.firstRev ?? 2;
  const accelDomain = opts.domain === 'acceleration';
  const marks = markTimes(spec);
  let sumPeriod = 0;
  const q = spec.neighbour_ratio ?? 1;
  const fNb = (q * spec.speed.rpm) / 60;
  let re = 0;
  let im = 0;
  let count = 0;
  for (let k = firstRev; k + 1 < marks.length; k++) {
    const t0 = marks[k]!;
    const T = marks[k + 1]! - t0;
    const w = (2 * Math.PI) / T;
    let p = oneXVelocity(spec, s, w);
    if (s.opposite_side) p = [-p[0], -p[1]];
    if (s.neighbour) {
      // neighbour velocity over the revolution as a function of shaft angle u in [0, 2 pi):
      // V cos(r u + beta), r = fNb T, beta = 2 pi fNb t0 - phi. Order-1 coefficient c = (1/pi) int
      // V cos(r u + beta) e^{-iu} du.
      const r = fNb * T;
      const beta = 2 * Math.PI * fNb * t0 - s.neighbour.phase_deg * RAD;
      const V = s.neighbour.vel_pk_mm_s;
      const int = (m: number): Cx => {
        // int_0^{2pi} e^{i m u} du
        if (Math.abs(m) < 1e-12) return [2 * Math.PI, 0];
        return [Math.sin(2 * Math.PI * m) / m, (1 - Math.cos(2 * Math.PI * m)) / m];
      };
      const a = cmul([Math.cos(beta), Math.sin(beta)], int(r - 1));
      const b = cmul([Math.cos(beta), -Math.sin(beta)], int(-(r + 1)));
      // c = (V / 2 pi) (a + b); a signal A cos(u - lag) has c = A e^{-i lag}
      p = [p[0] + (V / (2 * Math.PI)) * (a[0] + b[0]), p[1] + (V / (2 * Math.PI)) * (a[1] + b[1])];
    }
    // An average taken over acceleration revolutions weights each one by its own speed (a = i w v);
    // it is turned back into velocity at the mean speed below.
    const wt = accelDomain ? w : 1;
    re += wt * p[0];
    im += wt * p[1];
    sumPeriod += T;
    count++;
  }
  if (accelDomain) {
    const wMean = (2 * Math.PI) / (sumPeriod / count);
    re /= wMean;
    im /= wMean;
  }
  // The trigger crosses half height tau ln 2 after the mark: the reference comes later, the lag is
  // smaller.
  const delayDeg = 360 * (spec.speed.rpm / 60) * spec.tach.rise_us * 1e-6 * Math.LN2;
  const avg: Cx = [re / count, im / count];
  return phasor(ampOf(avg), lagOf(avg) - delayDeg);
}

/**
 * Expected overall velocity r.m.s. in the band, mm/s: the mean square of the deterministic velocity
 * (quasi-steady 1x at the instantaneous speed plus the neighbour), sampled every 0.5 ms over the
 * record, plus the noise, mains and impact band powers.
 */
export function expectedOverall(spec: PlantSpec, s: SensorSpec, lowHz = 10, highHz = 1000): number {
  const prof = new SpeedProfile(spec);
  const { theta } = shaftTrack(spec);
  const fs = spec.sample_rate_hz;
  const step = Math.round(fs / 2000);
  const fNb = ((spec.neighbour_ratio ?? 1) * spec.speed.rpm) / 60;
  let sum = 0;
  let n = 0;
  for (let i = 0; i < theta.length; i += step) {
    const t = i / fs;
    const p = oneXVelocity(spec, s, prof.omega(t));
    const sign = s.opposite_side ? -1 : 1;
    // Re{P e^{i theta}}
    let v = sign * (p[0] * Math.cos(theta[i]!) - p[1] * Math.sin(theta[i]!));
    if (s.neighbour)
      v += s.neighbour.vel_pk_mm_s * Math.cos(2 * Math.PI * fNb * t - s.neighbour.phase_deg * RAD);
    sum += v * v;
    n++;
  }
  const mains = mainsRmsMmS(s);
  const noise = noiseBandRmsMmS(s.noise_g, fs, lowHz, highHz);
  const impacts = impactBandPower(spec, s.impact_share ?? 0, lowHz, highHz);
  return Math.sqrt(sum / n + mains * mains + noise * noise + impacts);
}
